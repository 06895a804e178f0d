using System.Text.Json.Nodes;

namespace Assay.Evaluation;

/// <summary>How a probe is fitted. Checked as it is built: an invalid value throws from its initializer.</summary>
public sealed record ProbeOptions
{
    /// <summary>The values of C, the inverse regularization strength, tried by cross-validation (scikit-learn's C: larger = weaker L2 penalty).</summary>
    /// <exception cref="ArgumentException">No value, or one that is not a positive finite number.</exception>
    public IReadOnlyList<double> InverseRegularizations
    {
        get;
        init
        {
            ArgumentNullException.ThrowIfNull(value);
            if (value.Count == 0)
            {
                throw new ArgumentException("no values of C to try; give at least one", nameof(InverseRegularizations));
            }
            foreach (double c in value)
            {
                if (!(c > 0 && double.IsFinite(c)))
                {
                    throw new ArgumentOutOfRangeException(nameof(InverseRegularizations), c, "C must be a positive finite number");
                }
            }
            field = [.. value];
        }
    } = [1e-3, 1e-2, 1e-1, 1, 10, 100];

    /// <summary>Folds of the stratified cross-validation, at least 2.</summary>
    /// <exception cref="ArgumentOutOfRangeException">Fewer than 2.</exception>
    public int Folds
    {
        get;
        init => field = value >= 2 ? value : throw new ArgumentOutOfRangeException(nameof(Folds), value, "cross-validation needs at least 2 folds");
    } = 5;

    /// <summary>Seed of the fold assignment.</summary>
    public ulong Seed { get; init; } = 1;
}

/// <summary>How far a probe's search for C has come: values of C done (each one a full cross-validation) of all, the last one and its score.</summary>
/// <param name="Done">Values of C cross-validated so far.</param>
/// <param name="Count">Values of C to try.</param>
/// <param name="C">The last one done.</param>
/// <param name="LogLoss">Its mean held-out log loss.</param>
/// <param name="Elapsed">Time since the search began.</param>
public readonly record struct ProbeSearchProgress(int Done, int Count, double C, double LogLoss, TimeSpan Elapsed);

/// <summary>
/// A linear probe: features standardized with the training rows' mean and standard deviation (population, as
/// scikit-learn's StandardScaler; constant features are left centred), then multinomial L2 logistic regression whose
/// strength C is chosen by stratified k-fold cross-validation on the mean held-out log loss, refitted on all rows.
/// </summary>
public sealed class LinearProbe
{
    private readonly LogisticRegression _model;

    private LinearProbe(string[] classes, double[] mean, double[] scale, LogisticRegression model, double c, IReadOnlyList<(double C, double LogLoss, double Accuracy)> search)
    {
        Classes = classes;
        Mean = mean;
        Scale = scale;
        _model = model;
        InverseRegularization = c;
        Search = search;
    }

    /// <summary>Class names, ordinal order; class i is probability i.</summary>
    public IReadOnlyList<string> Classes { get; }

    /// <summary>The chosen C, the inverse regularization strength.</summary>
    public double InverseRegularization { get; }

    /// <summary>Each C tried with its cross-validated mean log loss and accuracy.</summary>
    public IReadOnlyList<(double C, double LogLoss, double Accuracy)> Search { get; }

    internal double[] Mean { get; }

    internal double[] Scale { get; }

    internal LogisticRegression Model => _model;

    /// <summary>Fits a probe on n rows of d features (row-major) and their labels.</summary>
    /// <exception cref="ArgumentException">Shapes disagree, fewer than two classes, or a class has fewer rows than folds.</exception>
    public static LinearProbe Fit(double[] x, int n, int d, IReadOnlyList<string> labels, ProbeOptions? options = null,
        IProgress<ProbeSearchProgress>? progress = null) => Fit(x, n, d, labels, options, progress, allowSmallClasses: false);

    /// <summary>As the public Fit; a control task's labels may leave a class with fewer rows than folds.</summary>
    internal static LinearProbe Fit(double[] x, int n, int d, IReadOnlyList<string> labels, ProbeOptions? options,
        IProgress<ProbeSearchProgress>? progress, bool allowSmallClasses)
    {
        options ??= new ProbeOptions();
        (string[] classes, int[] y) = ProbeFitting.Classes(x, n, d, labels, options.Folds, allowSmallClasses);
        (double best, IReadOnlyList<(double C, double LogLoss, double Accuracy)> search) = ProbeFitting.CrossValidate(x, n, d, y, classes.Length, options,
            (z, rows, labelsOf, c) => LogisticRegression.Fit(z, rows, d, labelsOf, classes.Length, c), progress);
        (double[] mean, double[] scale) = ProbeFitting.Standardization(x, n, d);
        double[] all = ProbeFitting.Standardize(x, n, d, mean, scale);
        return new LinearProbe(classes, mean, scale, LogisticRegression.Fit(all, n, d, y, classes.Length, best), best, search);
    }

    /// <summary>Class probabilities of each of n rows (n × classes, row-major).</summary>
    public double[] Predict(double[] x, int n, int d) => ProbeFitting.Predict(_model, Classes.Count, Mean, Scale, x, n, d);

    /// <summary>The largest probe file read (4,096 features × 1,000 classes as JSON text is about 80 MB).</summary>
    private const long ProbeFileBytes = 1L << 30;

    /// <summary>Reads a probe saved with <see cref="ToJson"/>.</summary>
    /// <exception cref="ArgumentException">The file is not such a probe (the message names it).</exception>
    public static LinearProbe FromJson(string path) => FromJson(path, Parse(path));

    /// <summary>The probe file's JSON object.</summary>
    /// <exception cref="ArgumentException">Not a JSON object (the message names the file).</exception>
    internal static JsonObject Parse(string path)
    {
        try
        {
            return (JsonInput.TryParseNode(InputFile.ReadAllBytes(path, ProbeFileBytes), 64, out string problem) ?? throw new System.Text.Json.JsonException(problem)).AsObject();
        }
        catch (Exception e) when (e is System.Text.Json.JsonException or InvalidOperationException or NullReferenceException)
        {
            throw new ArgumentException($"{path}: not a probe written by assay probe ({e.Message})", e);
        }
    }

    /// <summary>The probe in <paramref name="o"/>, read from <paramref name="path"/>.</summary>
    internal static LinearProbe FromJson(string path, JsonObject o)
    {
        try
        {
            string[] classes = [.. o["classes"]!.AsArray().Select(c => c!.GetValue<string>())];
            double[] mean = [.. o["mean"]!.AsArray().Select(v => v!.GetValue<double>())];
            double[] scale = [.. o["scale"]!.AsArray().Select(v => v!.GetValue<double>())];
            double[] weights = [.. o["weights"]!.AsArray().SelectMany(r => r!.AsArray().Select(v => v!.GetValue<double>()))];
            double[] intercepts = [.. o["intercepts"]!.AsArray().Select(v => v!.GetValue<double>())];
            var search = o["search"]!.AsArray().Select(s => (s!["c"]!.GetValue<double>(), s["cv_log_loss"]!.GetValue<double>(), s["cv_accuracy"]!.GetValue<double>())).ToList();
            var model = LogisticRegression.FromParameters(classes.Length, mean.Length, weights, intercepts);
            return new LinearProbe(classes, mean, scale, model, o["c"]!.GetValue<double>(), search);
        }
        catch (Exception e) when (e is System.Text.Json.JsonException or InvalidOperationException or NullReferenceException or FormatException)
        {
            throw new ArgumentException($"{path}: not a probe written by assay probe ({e.Message})", e);
        }
    }

    /// <summary>The probe as JSON: classes, standardization, weights, intercepts, C and the search.</summary>
    public JsonObject ToJson() => new()
    {
        ["classes"] = new JsonArray([.. Classes.Select(c => JsonValue.Create(c))]),
        ["c"] = InverseRegularization,
        ["search"] = new JsonArray([.. Search.Select(s => new JsonObject { ["c"] = s.C, ["cv_log_loss"] = s.LogLoss, ["cv_accuracy"] = s.Accuracy })]),
        ["mean"] = new JsonArray([.. Mean.Select(v => JsonValue.Create(v))]),
        ["scale"] = new JsonArray([.. Scale.Select(v => JsonValue.Create(v))]),
        ["weights"] = new JsonArray([.. Enumerable.Range(0, Classes.Count).Select(j => new JsonArray([.. _model.Weights.AsSpan(j * _model.Features, _model.Features).ToArray().Select(v => JsonValue.Create(v))]))]),
        ["intercepts"] = new JsonArray([.. _model.Intercepts.Select(v => JsonValue.Create(v))]),
    };

    /// <summary>The index of the most likely class (the first of equals).</summary>
    public static int MostLikely(ReadOnlySpan<double> p)
    {
        int best = 0;
        for (int j = 1; j < p.Length; j++)
        {
            best = p[j] > p[best] ? j : best;
        }
        return best;
    }
}
