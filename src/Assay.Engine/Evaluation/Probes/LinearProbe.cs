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
        IProgress<ProbeSearchProgress>? progress = null)
    {
        options ??= new ProbeOptions();
        if (labels.Count != n || x.Length != (long)n * d)
        {
            throw new ArgumentException($"expected {n} × {d} features and {n} labels; got {x.Length} values and {labels.Count} labels");
        }
        LabelIndex index = LabelIndex.Sorted(labels);
        string[] classes = [.. index.Classes];
        if (classes.Length < 2)
        {
            throw new ArgumentException($"a probe needs at least two classes; the labels hold {classes.Length}");
        }
        int[] y = index.Indices(labels);
        string? small = classes.FirstOrDefault(c => labels.Count(l => l == c) < options.Folds);
        if (small != null)
        {
            throw new ArgumentException($"class \"{small}\" has fewer rows than the {options.Folds} folds; merge or drop it, or use fewer folds");
        }

        (double[] mean, double[] scale) = Standardization(x, n, d);
        double[] z = Standardize(x, n, d, mean, scale);
        int[] fold = Folds(y, classes.Length, options.Folds, options.Seed);
        var search = new List<(double C, double LogLoss, double Accuracy)>();
        var clock = System.Diagnostics.Stopwatch.StartNew();
        foreach (double c in options.InverseRegularizations)
        {
            double loss = 0;
            int correct = 0;
            for (int f = 0; f < options.Folds; f++)
            {
                int[] train = [.. Enumerable.Range(0, n).Where(i => fold[i] != f)];
                int[] held = [.. Enumerable.Range(0, n).Where(i => fold[i] == f)];
                // Standardization inside each fold uses that fold's training rows only.
                double[] xt = Rows(x, d, train);
                (double[] m, double[] s) = Standardization(xt, train.Length, d);
                LogisticRegression model = LogisticRegression.Fit(Standardize(xt, train.Length, d, m, s), train.Length, d, [.. train.Select(i => y[i])], classes.Length, c);
                double[] p = new double[classes.Length];
                double[] row = new double[d];
                foreach (int i in held)
                {
                    for (int k = 0; k < d; k++)
                    {
                        row[k] = (x[(i * d) + k] - m[k]) / s[k];
                    }
                    model.Probabilities(row, p);
                    loss -= Math.Log(Math.Max(p[y[i]], 1e-15));
                    correct += MostLikely(p) == y[i] ? 1 : 0;
                }
            }
            search.Add((c, loss / n, (double)correct / n));
            progress?.Report(new ProbeSearchProgress(search.Count, options.InverseRegularizations.Count, c, loss / n, clock.Elapsed));
        }
        double best = search.OrderBy(s => s.LogLoss).ThenBy(s => s.C).First().C;
        return new LinearProbe(classes, mean, scale, LogisticRegression.Fit(z, n, d, y, classes.Length, best), best, search);
    }

    /// <summary>Class probabilities of each of n rows (n × classes, row-major).</summary>
    public double[] Predict(double[] x, int n, int d)
    {
        if (d != Mean.Length || x.Length != (long)n * d)
        {
            throw new ArgumentException($"the probe takes {Mean.Length} features a row; got {d}");
        }
        int k = Classes.Count;
        double[] p = new double[n * k];
        double[] row = new double[d];
        for (int i = 0; i < n; i++)
        {
            for (int f = 0; f < d; f++)
            {
                row[f] = (x[(i * d) + f] - Mean[f]) / Scale[f];
            }
            _model.Probabilities(row, p.AsSpan(i * k, k));
        }
        return p;
    }

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

    private static (double[] Mean, double[] Scale) Standardization(double[] x, int n, int d)
    {
        double[] mean = new double[d], scale = new double[d];
        for (int i = 0; i < n; i++)
        {
            for (int f = 0; f < d; f++)
            {
                mean[f] += x[(i * d) + f] / n;
            }
        }
        for (int i = 0; i < n; i++)
        {
            for (int f = 0; f < d; f++)
            {
                double c = x[(i * d) + f] - mean[f];
                scale[f] += c * c / n;
            }
        }
        for (int f = 0; f < d; f++)
        {
            scale[f] = scale[f] > 0 ? Math.Sqrt(scale[f]) : 1;
        }
        return (mean, scale);
    }

    private static double[] Standardize(double[] x, int n, int d, double[] mean, double[] scale)
    {
        double[] z = new double[x.Length];
        for (int i = 0; i < n; i++)
        {
            for (int f = 0; f < d; f++)
            {
                z[(i * d) + f] = (x[(i * d) + f] - mean[f]) / scale[f];
            }
        }
        return z;
    }

    private static double[] Rows(double[] x, int d, int[] rows)
    {
        double[] r = new double[rows.Length * d];
        for (int i = 0; i < rows.Length; i++)
        {
            x.AsSpan(rows[i] * d, d).CopyTo(r.AsSpan(i * d, d));
        }
        return r;
    }

    /// <summary>Stratified folds: each class's rows, in a seeded shuffled order, dealt round-robin to the folds.</summary>
    private static int[] Folds(int[] y, int classes, int folds, ulong seed)
    {
        var rng = new Random(unchecked((int)seed) ^ 0x5eed);
        int[] fold = new int[y.Length];
        for (int c = 0; c < classes; c++)
        {
            int[] rows = [.. Enumerable.Range(0, y.Length).Where(i => y[i] == c)];
            rng.Shuffle(rows);
            for (int i = 0; i < rows.Length; i++)
            {
                fold[rows[i]] = i % folds;
            }
        }
        return fold;
    }
}
