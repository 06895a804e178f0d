namespace Assay.Evaluation;

/// <summary>A fitted classifier on standardized features.</summary>
internal interface IProbeModel
{
    /// <summary>Class probabilities of one standardized row.</summary>
    void Probabilities(ReadOnlySpan<double> row, Span<double> p);
}

/// <summary>
/// What every probe kind shares: the label check, standardization (population standard deviation, as scikit-learn's
/// StandardScaler; constant features are left centred), stratified folds, and the search for C by cross-validation on
/// the mean held-out log loss (standardization inside each fold from that fold's training rows only).
/// </summary>
internal static class ProbeFitting
{
    /// <summary>Class names (ordinal order) and each row's class index, after checking shapes, two classes or more, and rows for every fold.</summary>
    /// <exception cref="ArgumentException">Shapes disagree, fewer than two classes, or (unless allowed: a control task's
    /// rare classes) a class has fewer rows than folds.</exception>
    public static (string[] Classes, int[] Y) Classes(double[] x, int n, int d, IReadOnlyList<string> labels, int folds, bool allowSmallClasses = false)
    {
        ArgumentNullException.ThrowIfNull(x);
        ArgumentNullException.ThrowIfNull(labels);
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
        string? small = allowSmallClasses ? null : classes.FirstOrDefault(c => labels.Count(l => l == c) < folds);
        if (small != null)
        {
            throw new ArgumentException($"class \"{small}\" has fewer rows than the {folds} folds; merge or drop it, or use fewer folds");
        }
        return (classes, index.Indices(labels));
    }

    /// <summary>
    /// Cross-validates every C of the options with <paramref name="fit"/> (standardized rows, their count, their
    /// classes, C) and returns the C of the lowest mean held-out log loss (the smaller of equals) and the search.
    /// </summary>
    public static (double Best, IReadOnlyList<(double C, double LogLoss, double Accuracy)> Search) CrossValidate(double[] x, int n, int d, int[] y, int classes,
        ProbeOptions options, Func<double[], int, int[], double, IProbeModel> fit, IProgress<ProbeSearchProgress>? progress)
    {
        int[] fold = Folds(y, classes, options.Folds, options.Seed);
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
                double[] xt = Rows(x, d, train);
                (double[] m, double[] s) = Standardization(xt, train.Length, d);
                IProbeModel model = fit(Standardize(xt, train.Length, d, m, s), train.Length, [.. train.Select(i => y[i])], c);
                double[] p = new double[classes];
                double[] row = new double[d];
                foreach (int i in held)
                {
                    for (int k = 0; k < d; k++)
                    {
                        row[k] = (x[(i * d) + k] - m[k]) / s[k];
                    }
                    model.Probabilities(row, p);
                    loss -= Math.Log(Math.Max(p[y[i]], 1e-15));
                    correct += LinearProbe.MostLikely(p) == y[i] ? 1 : 0;
                }
            }
            search.Add((c, loss / n, (double)correct / n));
            progress?.Report(new ProbeSearchProgress(search.Count, options.InverseRegularizations.Count, c, loss / n, clock.Elapsed));
        }
        return (search.OrderBy(s => s.LogLoss).ThenBy(s => s.C).First().C, search);
    }

    /// <summary>The checks every classifier's fit makes of its arguments.</summary>
    /// <exception cref="ArgumentException">Shapes disagree, no rows, a label out of range, or C not a positive finite number.</exception>
    public static void CheckFit(double[] x, int n, int d, int[] y, int classes, double c)
    {
        if (x.Length != (long)n * d || y.Length != n || n == 0)
        {
            throw new ArgumentException($"expected {n} × {d} features and {n} labels; got {x.Length} values and {y.Length} labels");
        }
        if (!(c > 0 && double.IsFinite(c)))
        {
            throw new ArgumentException($"C = {c}: expected a positive regularization strength");
        }
        foreach (int label in y)
        {
            if ((uint)label >= (uint)classes)
            {
                throw new ArgumentException($"label {label} is outside 0 … {classes - 1}");
            }
        }
    }

    /// <summary>Class probabilities (n × classes) of raw rows, standardized with <paramref name="mean"/> and <paramref name="scale"/>.</summary>
    /// <exception cref="ArgumentException">The rows are not <paramref name="mean"/>'s width.</exception>
    public static double[] Predict(IProbeModel model, int classes, double[] mean, double[] scale, double[] x, int n, int d)
    {
        ArgumentNullException.ThrowIfNull(x);
        if (d != mean.Length || x.Length != (long)n * d)
        {
            throw new ArgumentException($"the probe takes {mean.Length} features a row; got {d}");
        }
        double[] p = new double[n * classes];
        double[] row = new double[d];
        for (int i = 0; i < n; i++)
        {
            for (int f = 0; f < d; f++)
            {
                row[f] = (x[(i * d) + f] - mean[f]) / scale[f];
            }
            model.Probabilities(row, p.AsSpan(i * classes, classes));
        }
        return p;
    }

    public static (double[] Mean, double[] Scale) Standardization(double[] x, int n, int d)
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

    public static double[] Standardize(double[] x, int n, int d, double[] mean, double[] scale)
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

    /// <summary>The given rows of x, in that order.</summary>
    public static double[] Rows(double[] x, int d, IReadOnlyList<int> rows)
    {
        double[] r = new double[rows.Count * d];
        for (int i = 0; i < rows.Count; i++)
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
