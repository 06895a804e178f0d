using Assay.Model;

namespace Assay.Features;

/// <summary>
/// A feature kind bound to one extraction. The extractor runs every row's sequence (and each candidate continuation
/// the steps name) through the model, then calls the steps: with the hidden states, with the next-word distributions
/// of a slice of rows, and with each scored continuation token. A step writes only its own outputs.
/// </summary>
internal abstract class FeatureStep(int firstOutput)
{
    /// <summary>The index of the step's first output in the row.</summary>
    protected int First { get; } = firstOutput;

    /// <summary>Layers whose hidden states the step reads (0 … L).</summary>
    public virtual IEnumerable<int> Layers => [];

    /// <summary>Whether the step reads the next-word distribution after the filled template.</summary>
    public virtual bool NeedsDistribution => false;

    /// <summary>Continuations (token ids) whose log-likelihood after the filled template the step reads.</summary>
    public virtual IReadOnlyList<int[]> Continuations => [];

    /// <summary>Reads the hidden states of the row's sequence <paramref name="sequence"/> of a forward result.</summary>
    public virtual void FromHidden(ForwardResult result, int sequence, PreparedRow row, RowOutputs outputs)
    {
    }

    /// <summary>
    /// Reads the next-word distributions of <paramref name="count"/> rows (V values each, laid end to end in
    /// <paramref name="p"/>); one call per slice of rows, so a step can run the head over the slice at once.
    /// </summary>
    public virtual void FromDistributions(ReadOnlySpan<float> p, int count, ReadOnlySpan<RowOutputs> rows, OutputHead head, ParallelOptions parallel)
    {
        int v = head.VocabularySize;
        for (int i = 0; i < count; i++)
        {
            FromDistribution(p.Slice(i * v, v), rows[i]);
        }
    }

    /// <summary>Adds log p of one token of continuation <paramref name="continuation"/> (called for each of its tokens in order).</summary>
    public virtual void AddLogProbability(int continuation, float logProbability, RowOutputs outputs)
    {
    }

    /// <summary>Reads one row's next-word distribution.</summary>
    protected virtual void FromDistribution(ReadOnlySpan<float> p, RowOutputs outputs)
    {
    }
}
