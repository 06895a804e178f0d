namespace Assay.Evaluation;

/// <summary>
/// Zero-shot scoring, the one scorer of <c>assay zero-shot</c> and the study: each row's label distribution is the
/// verbalizer's renormalized label scores (<see cref="Verbalizer.Distribution"/>), laid out in the class order of
/// <paramref name="classes"/>, and the rows are scored against their labels.
/// </summary>
/// <param name="verbalizer">The label words.</param>
/// <param name="classes">The class order of the probabilities and the report; holds the verbalizer's labels.</param>
/// <param name="logLikelihoods">Whether the word values are log-likelihoods (else first-token probabilities).</param>
public sealed class ZeroShotScorer(Verbalizer verbalizer, LabelIndex classes, bool logLikelihoods)
{
    private readonly int[] _position = [.. verbalizer.Labels.Select(l => classes.TryGetIndex(l, out int i) ? i
        : throw new ArgumentException($"the verbalizer's label \"{l}\" is not one of the classes", nameof(classes)))];

    private readonly double[] _scores = new double[verbalizer.Labels.Count];
    private readonly List<double> _probabilities = [];
    private readonly List<int> _truth = [];

    /// <summary>Rows scored so far.</summary>
    public int Rows => _truth.Count;

    /// <summary>Adds a row: its word values (in <see cref="Verbalizer.AllWords"/> order) and its class index.</summary>
    public void Add(ReadOnlySpan<float> wordValues, int truth)
    {
        verbalizer.Distribution(wordValues, logLikelihoods, _scores);
        var row = new double[classes.Count];
        for (int j = 0; j < _scores.Length; j++)
        {
            row[_position[j]] = _scores[j];
        }
        _probabilities.AddRange(row);
        _truth.Add(truth);
    }

    /// <summary>The label distributions of the rows added (rows × classes, in the class order).</summary>
    public double[] Probabilities() => [.. _probabilities];

    /// <summary>The report of the rows added.</summary>
    public ClassificationReport Report() => ClassificationReport.Score([.. _probabilities], [.. _truth], classes.Count);
}
