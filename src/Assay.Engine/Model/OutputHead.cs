using Assay.Kernels;

namespace Assay.Model;

/// <summary>
/// The output head E (V × d, held packed as Eᵀ): final hidden states to logits, logits to the next-word distribution
/// or to log-probabilities, and distributions to the conditional-mean feature Φp = Σ_v p_v·E_v. The one place outside
/// the forward pass that reads the head's packed weights and picks its kernels.
/// </summary>
internal sealed class OutputHead(PackedMatrix matrix)
{
    /// <summary>Hidden width d.</summary>
    public int Width => matrix.Rows;

    /// <summary>Vocabulary size V.</summary>
    public int VocabularySize => matrix.Columns;

    /// <summary>Bytes the head takes in memory.</summary>
    public long Bytes => matrix.Bytes;

    /// <summary>Whether the head is the packed matrix <paramref name="other"/> (a head tied to the token embedding).</summary>
    public bool Uses(PackedMatrix other) => ReferenceEquals(matrix, other);

    /// <summary>logits (rows × V) = hidden (rows × d) · Eᵀ, each value one in-order float32 dot product.</summary>
    public void Logits(ReadOnlySpan<float> hidden, int rows, Span<float> logits, ParallelOptions parallel, KernelVariant? variant = null) =>
        CpuKernels.Gemm(hidden, rows, Width, matrix, logits, VocabularySize, accumulate: false, variant ?? KernelSelector.Current, parallel);

    /// <summary>softmax in place: a logits row becomes the next-word distribution (float32, maximum subtracted first).</summary>
    public static void Softmax(Span<float> logits) => CpuKernels.SoftmaxInPlace(logits);

    /// <summary>log p(token) = x_token − max x − ln Σ exp(x − max x) in float32; the row is overwritten.</summary>
    public static float LogProbability(Span<float> logits, int token) => CpuKernels.LogSoftmaxAt(logits, token);

    /// <summary>
    /// Φp for each of <paramref name="rows"/> distributions p (V values each, laid end to end): output (rows × d) =
    /// p · E, each value summed in 64 lanes in panel order, then the lanes in order (the same bits on every kernel path).
    /// </summary>
    public void ConditionalMean(ReadOnlySpan<float> p, int rows, Span<float> output, ParallelOptions parallel, KernelVariant? variant = null) =>
        CpuKernels.ConditionalMean(p, rows, matrix, output, variant ?? KernelSelector.Current, parallel);
}
