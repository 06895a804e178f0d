using System.Globalization;
using System.Text.RegularExpressions;
using Assay.Output;

namespace Assay.Evaluation;

/// <summary>One layer of a sweep: the probe fitted on that layer's hidden states and its test scores.</summary>
/// <param name="Layer">The layer (0 = embeddings, L = after the final norm).</param>
/// <param name="Stem">Its feature file stem.</param>
/// <param name="InverseRegularization">The C cross-validation chose.</param>
/// <param name="Classes">The probe's classes, in probability order.</param>
/// <param name="Probabilities">Test rows × classes.</param>
/// <param name="Test">The test scores.</param>
/// <param name="Control">The control task's fit on the same layer, when one was asked for.</param>
public sealed record LayerResult(int Layer, string Stem, double InverseRegularization, IReadOnlyList<string> Classes, double[] Probabilities,
    ClassificationReport Test, ControlFit? Control);

/// <summary>
/// A probe per layer: the hidden states of every requested layer (one pooling) of a training run, each probed as
/// <c>assay probe</c> probes one feature and scored on the test run, with a control task per layer when asked.
/// </summary>
public static partial class LayerSweep
{
    [GeneratedRegex(@"^hidden\.layer(\d+)\.([a-z]+)$")]
    private static partial Regex HiddenStem();

    /// <summary>
    /// The feature stems of the layers named by <paramref name="layers"/> ("all", or comma-separated indices, negative
    /// counting from the end) in the pooling of <paramref name="stem"/>, a hidden-state stem, checked to be in the run.
    /// </summary>
    /// <exception cref="ArgumentException">The stem is not a hidden state, or the layer list is malformed.</exception>
    /// <exception cref="RunFolderException">A layer's file is not in the run (the message lists what it holds).</exception>
    public static IReadOnlyList<(int Layer, string Stem)> Stems(string runFolder, string stem, string layers)
    {
        ArgumentNullException.ThrowIfNull(runFolder);
        ArgumentNullException.ThrowIfNull(stem);
        ArgumentNullException.ThrowIfNull(layers);
        Match m = HiddenStem().Match(stem);
        if (!m.Success)
        {
            throw new ArgumentException($"--layers sweeps hidden states; the feature {stem} is not one (give --feature hidden, hidden:mean or hidden:mark)");
        }
        string pooling = m.Groups[2].Value;
        RunRecord record = RunRecord.Read(runFolder);
        int last = record.Shape.Layers;
        int[] wanted = layers == "all" ? [.. Enumerable.Range(0, last + 1)]
            : [.. layers.Split(',', StringSplitOptions.TrimEntries).Select(s =>
                int.TryParse(s, NumberStyles.AllowLeadingSign, CultureInfo.InvariantCulture, out int k) && k >= -(last + 1) && k <= last ? (k < 0 ? last + 1 + k : k)
                    : throw new ArgumentException($"--layers: \"{s}\" is not a layer of this model (0 … {last}, or negative from the end); or give all"))];
        if (wanted.Distinct().Count() != wanted.Length)
        {
            throw new ArgumentException("--layers: a layer is listed twice");
        }
        return [.. wanted.Order().Select(k => (k, RunFeatures.Resolve(runFolder, string.Create(CultureInfo.InvariantCulture, $"hidden.layer{k}.{pooling}"))))];
    }

    /// <summary>Fits and scores one probe per layer (and a control probe per layer when types are given), reporting each layer as it finishes.</summary>
    public static IReadOnlyList<LayerResult> Run(string trainRun, string testRun, IReadOnlyList<(int Layer, string Stem)> stems, ProbeKind kind, ProbeOptions options,
        (IReadOnlyList<string> Train, IReadOnlyList<string> Test)? controlTypes = null, ulong controlSeed = 1,
        IProgress<LayerResult>? finished = null, IProgress<ProbeSearchProgress>? search = null)
    {
        ArgumentNullException.ThrowIfNull(trainRun);
        ArgumentNullException.ThrowIfNull(testRun);
        ArgumentNullException.ThrowIfNull(stems);
        ArgumentNullException.ThrowIfNull(options);
        var results = new List<LayerResult>();
        foreach ((int layer, string stem) in stems)
        {
            RunFeatures train = RunFeatures.Load(trainRun, stem), test = RunFeatures.Load(testRun, stem);
            (IReadOnlyList<string> classes, double c, ProbeScore score) = kind.HiddenUnits == 0
                ? Linear(train, test, testRun, options, search)
                : Mlp(train, test, testRun, kind.HiddenUnits, options, search);
            ControlFit? control = controlTypes is { } t
                ? ControlTask.FitControl(train, t.Train, test, t.Test, kind, options, controlSeed, search)
                : null;
            var result = new LayerResult(layer, stem, c, classes, score.Probabilities, score.Report, control);
            results.Add(result);
            finished?.Report(result);
        }
        return results;
    }

    private static (IReadOnlyList<string>, double, ProbeScore) Linear(RunFeatures train, RunFeatures test, string testRun, ProbeOptions options, IProgress<ProbeSearchProgress>? search)
    {
        LinearProbe p = LinearProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, options, search);
        return (p.Classes, p.InverseRegularization, ProbeScorer.Score(p, test, testRun));
    }

    private static (IReadOnlyList<string>, double, ProbeScore) Mlp(RunFeatures train, RunFeatures test, string testRun, int hidden, ProbeOptions options, IProgress<ProbeSearchProgress>? search)
    {
        MlpProbe p = MlpProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, options, hidden, progress: search);
        return (p.Classes, p.InverseRegularization, ProbeScorer.Score(p, test, testRun));
    }
}
