using System.Globalization;
using System.Text.Json.Nodes;

namespace Assay.Evaluation;

/// <summary>One block of the online code: rows [Start, End) of the transmission order, sent with a probe trained on rows [0, Start).</summary>
/// <param name="Start">First row of the block.</param>
/// <param name="End">One past its last row.</param>
/// <param name="Bits">Bits spent on its labels (the first block: the uniform code).</param>
public readonly record struct OnlineBlock(int Start, int End, double Bits);

/// <summary>
/// The online code's description length of a task's labels given the features, and the uniform code's.
/// </summary>
/// <param name="Rows">Training rows.</param>
/// <param name="Classes">Classes (the uniform code spends log₂ of this a row).</param>
/// <param name="Kind">The probe trained for each block.</param>
/// <param name="InverseRegularization">Its C, the same for every block.</param>
/// <param name="Blocks">The blocks, in order.</param>
public sealed record OnlineCodeResult(int Rows, int Classes, ProbeKind Kind, double InverseRegularization, IReadOnlyList<OnlineBlock> Blocks)
{
    /// <summary>The online codelength in bits: the first block uniformly, every later one with the probe trained on all rows before it.</summary>
    public double CodelengthBits => Blocks.Sum(b => b.Bits);

    /// <summary>The uniform code's length: Rows · log₂ Classes.</summary>
    public double UniformBits => Rows * Math.Log2(Classes);

    /// <summary>Uniform codelength / online codelength: above 1 when the features make the labels cheaper to send.</summary>
    public double Compression => UniformBits / CodelengthBits;

    /// <summary>The result as JSON.</summary>
    public JsonObject ToJson() => new()
    {
        ["probe"] = Kind.ToString(),
        ["c"] = InverseRegularization,
        ["rows"] = Rows,
        ["classes"] = Classes,
        ["codelength_bits"] = CodelengthBits,
        ["uniform_bits"] = UniformBits,
        ["compression"] = Compression,
        ["blocks"] = new JsonArray([.. Blocks.Select(b => new JsonObject { ["start"] = b.Start, ["end"] = b.End, ["bits"] = b.Bits })]),
    };
}

/// <summary>
/// Minimum description length probing by the online code (Voita and Titov, 2020): the training rows, in a seeded
/// random order, are sent in blocks that end at 0.1, 0.2, 0.4, 0.8, 1.6, 3.2, 6.25, 12.5, 25, 50 and 100 % of them;
/// the first block's labels with the uniform code, each later block's with a probe fitted (standardization included)
/// on all rows before it, at −log₂ p(label) bits a row (p clipped at 10⁻¹⁵, as the log loss is). A representation
/// that makes the task easy to learn from few rows gives a short code.
/// </summary>
public static class OnlineCode
{
    /// <summary>The published block ends, in percent of the rows.</summary>
    public static IReadOnlyList<double> Fractions { get; } = [0.1, 0.2, 0.4, 0.8, 1.6, 3.2, 6.25, 12.5, 25, 50, 100];

    /// <summary>The block ends for n rows: ⌊f·n/100⌋ for each fraction, at least 1, repeats dropped, the last n.</summary>
    public static int[] BlockEnds(int n)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(n, 2);
        return [.. Fractions.Select(f => Math.Clamp((int)Math.Floor(f * n / 100), 1, n)).Distinct()];
    }

    /// <summary>Measures the online codelength of the labels of n rows of d features.</summary>
    /// <exception cref="ArgumentException">Shapes disagree, fewer than 2 rows or classes, or C is not positive.</exception>
    public static OnlineCodeResult Measure(double[] x, int n, int d, IReadOnlyList<string> labels, ProbeKind kind, double c, ulong seed = 1,
        IProgress<(int Done, int Count)>? progress = null) => Measure(x, n, d, labels, kind, c, seed, progress, null);

    /// <summary>As the public Measure; <paramref name="observe"/> is told each encoded block's rows, their classes and the probe's probabilities for them.</summary>
    internal static OnlineCodeResult Measure(double[] x, int n, int d, IReadOnlyList<string> labels, ProbeKind kind, double c, ulong seed,
        IProgress<(int Done, int Count)>? progress, Action<int[], int[], double[]>? observe)
    {
        ArgumentNullException.ThrowIfNull(x);
        ArgumentNullException.ThrowIfNull(labels);
        if (labels.Count != n || x.Length != (long)n * d || n < 2)
        {
            throw new ArgumentException($"expected {n} × {d} features and {n} labels, at least 2 rows; got {x.Length} values and {labels.Count} labels");
        }
        if (!(c > 0 && double.IsFinite(c)))
        {
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture, $"C = {c}: expected a positive regularization strength"));
        }
        LabelIndex index = LabelIndex.Sorted(labels);
        int k = index.Classes.Count;
        if (k < 2)
        {
            throw new ArgumentException($"the online code needs at least two classes; the labels hold {k}");
        }
        int[] y = index.Indices(labels);
        int[] order = [.. Enumerable.Range(0, n)];
        new Random(unchecked((int)seed) ^ 0x0c0de).Shuffle(order);
        int[] ends = BlockEnds(n);
        var blocks = new List<OnlineBlock> { new(0, ends[0], ends[0] * Math.Log2(k)) };
        for (int b = 1; b < ends.Length; b++)
        {
            int start = ends[b - 1], end = ends[b];
            int[] seen = order[..start], sent = order[start..end];
            double[] xt = ProbeFitting.Rows(x, d, seen);
            (double[] mean, double[] scale) = ProbeFitting.Standardization(xt, start, d);
            double[] z = ProbeFitting.Standardize(xt, start, d, mean, scale);
            int[] yt = [.. seen.Select(i => y[i])];
            IProbeModel model = kind.HiddenUnits == 0
                ? LogisticRegression.Fit(z, start, d, yt, k, c)
                : TwoLayerPerceptron.Fit(z, start, d, yt, k, kind.HiddenUnits, c, seed);
            double[] p = ProbeFitting.Predict(model, k, mean, scale, ProbeFitting.Rows(x, d, sent), sent.Length, d);
            double bits = 0;
            for (int i = 0; i < sent.Length; i++)
            {
                bits -= Math.Log2(Math.Max(p[(i * k) + y[sent[i]]], 1e-15));
            }
            observe?.Invoke(sent, [.. sent.Select(i => y[i])], p);
            blocks.Add(new OnlineBlock(start, end, bits));
            progress?.Report((b, ends.Length - 1));
        }
        return new OnlineCodeResult(n, k, kind, c, blocks);
    }
}
