namespace Assay.Evaluation;

/// <summary>
/// A small non-linear probe, to show how much of a linear probe's score is the representation and how much a probe
/// with more capacity adds: features standardized as for <see cref="LinearProbe"/>, then one hidden layer of tanh
/// units and a softmax (scikit-learn's MLPClassifier objective with α = 1/C), C chosen by the same stratified
/// cross-validation on the held-out log loss and refitted on all rows.
/// </summary>
public sealed class MlpProbe
{
    private readonly TwoLayerPerceptron _model;
    private readonly double[] _mean;
    private readonly double[] _scale;

    private MlpProbe(string[] classes, double[] mean, double[] scale, TwoLayerPerceptron model, double c,
        IReadOnlyList<(double C, double LogLoss, double Accuracy)> search, int unconverged)
    {
        Classes = classes;
        _mean = mean;
        _scale = scale;
        _model = model;
        InverseRegularization = c;
        Search = search;
        Unconverged = unconverged;
    }

    /// <summary>The default hidden layer width.</summary>
    public const int DefaultHiddenUnits = 64;

    /// <summary>Class names, ordinal order; class i is probability i.</summary>
    public IReadOnlyList<string> Classes { get; }

    /// <summary>Hidden units.</summary>
    public int HiddenUnits => _model.Hidden;

    /// <summary>The chosen C (α = 1/C).</summary>
    public double InverseRegularization { get; }

    /// <summary>Each C tried with its cross-validated mean log loss and accuracy.</summary>
    public IReadOnlyList<(double C, double LogLoss, double Accuracy)> Search { get; }

    /// <summary>Fits of the search and the final fit that stopped at the iteration limit rather than converging (0 is the normal case).</summary>
    public int Unconverged { get; }

    /// <summary>Fits an MLP probe on n rows of d features (row-major) and their labels.</summary>
    /// <param name="x">The features.</param>
    /// <param name="n">Rows.</param>
    /// <param name="d">Features a row.</param>
    /// <param name="labels">One label a row.</param>
    /// <param name="options">Folds, the values of C, and the seed (also of the initialization).</param>
    /// <param name="hiddenUnits">Width of the hidden layer.</param>
    /// <param name="maxIterations">L-BFGS iterations a fit may take.</param>
    /// <param name="progress">Told after each value of C.</param>
    /// <exception cref="ArgumentException">Shapes disagree, fewer than two classes, a class has fewer rows than folds, or no hidden unit.</exception>
    public static MlpProbe Fit(double[] x, int n, int d, IReadOnlyList<string> labels, ProbeOptions? options = null, int hiddenUnits = DefaultHiddenUnits,
        int maxIterations = 500, IProgress<ProbeSearchProgress>? progress = null) => Fit(x, n, d, labels, options, hiddenUnits, maxIterations, progress, allowSmallClasses: false);

    /// <summary>As the public Fit; a control task's labels may leave a class with fewer rows than folds.</summary>
    internal static MlpProbe Fit(double[] x, int n, int d, IReadOnlyList<string> labels, ProbeOptions? options, int hiddenUnits,
        int maxIterations, IProgress<ProbeSearchProgress>? progress, bool allowSmallClasses)
    {
        options ??= new ProbeOptions();
        ArgumentOutOfRangeException.ThrowIfLessThan(hiddenUnits, 1);
        ArgumentOutOfRangeException.ThrowIfLessThan(maxIterations, 1);
        (string[] classes, int[] y) = ProbeFitting.Classes(x, n, d, labels, options.Folds, allowSmallClasses);
        int unconverged = 0;
        TwoLayerPerceptron Train(double[] z, int rows, int[] labelsOf, double c)
        {
            TwoLayerPerceptron m = TwoLayerPerceptron.Fit(z, rows, d, labelsOf, classes.Length, hiddenUnits, c, options.Seed, maxIterations: maxIterations);
            Interlocked.Add(ref unconverged, m.Converged ? 0 : 1);
            return m;
        }
        (double best, IReadOnlyList<(double C, double LogLoss, double Accuracy)> search) = ProbeFitting.CrossValidate(x, n, d, y, classes.Length, options, Train, progress);
        (double[] mean, double[] scale) = ProbeFitting.Standardization(x, n, d);
        TwoLayerPerceptron model = Train(ProbeFitting.Standardize(x, n, d, mean, scale), n, y, best);
        return new MlpProbe(classes, mean, scale, model, best, search, unconverged);
    }

    /// <summary>Class probabilities of each of n rows (n × classes, row-major).</summary>
    /// <exception cref="ArgumentException">The rows are not the probe's width.</exception>
    public double[] Predict(double[] x, int n, int d) => ProbeFitting.Predict(_model, Classes.Count, _mean, _scale, x, n, d);
}
