using Assay.Output;

namespace Assay.Evaluation;

/// <summary>A probe's predictions on one feature of a run folder and their report against the run's labels.</summary>
/// <param name="Probabilities">Rows × classes, in the probe's class order.</param>
/// <param name="Truth">Each row's class index.</param>
/// <param name="Report">The scores.</param>
public sealed record ProbeScore(double[] Probabilities, int[] Truth, ClassificationReport Report);

/// <summary>Scores a fitted probe on a run's features: the one probe scorer of <c>assay probe</c> and the study.</summary>
public static class ProbeScorer
{
    /// <exception cref="RunFolderException">A label of the run is not one of the probe's classes.</exception>
    public static ProbeScore Score(LinearProbe probe, RunFeatures test, string testRun)
    {
        ArgumentNullException.ThrowIfNull(probe);
        return Score(probe.Classes, probe.Predict, test, testRun);
    }

    /// <exception cref="RunFolderException">A label of the run is not one of the probe's classes.</exception>
    public static ProbeScore Score(MlpProbe probe, RunFeatures test, string testRun)
    {
        ArgumentNullException.ThrowIfNull(probe);
        return Score(probe.Classes, probe.Predict, test, testRun);
    }

    private static ProbeScore Score(IReadOnlyList<string> probeClasses, Func<double[], int, int, double[]> predict, RunFeatures test, string testRun)
    {
        ArgumentNullException.ThrowIfNull(test);
        var classes = new LabelIndex(probeClasses);
        string? unknown = classes.FirstUnknown(test.Labels);
        if (unknown != null)
        {
            throw new RunFolderException(testRun, $"label \"{unknown}\" is not one of the probe's classes (it has no training rows)");
        }
        double[] p = predict(test.Values, test.Rows, test.Width);
        int[] truth = classes.Indices(test.Labels);
        return new ProbeScore(p, truth, ClassificationReport.Score(p, truth, classes.Count));
    }
}
