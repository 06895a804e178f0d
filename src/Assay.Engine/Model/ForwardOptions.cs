namespace Assay.Model;

/// <summary>What one forward pass keeps. Checked as it is built: an invalid value throws from its initializer.</summary>
public sealed record ForwardOptions
{
    /// <summary>
    /// Layers whose hidden states the result keeps: 0 is the embedding sum (token + position), k = 1 … L−1 the
    /// residual stream after block k, and L the output of the final LayerNorm applied after block L.
    /// </summary>
    public IReadOnlyList<int> HiddenLayers { get; init => field = [.. value ?? throw new ArgumentNullException(nameof(HiddenLayers))]; } = [];

    /// <summary>Where logits are computed.</summary>
    public LogitPositions Logits { get; init; } = LogitPositions.Last;

    /// <summary>
    /// At most this many worker threads (0: as many as the runtime gives, normally one per core). Results do not
    /// depend on it: every output element is computed by one thread in a fixed order.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">Negative.</exception>
    public int MaxThreads
    {
        get;
        init => field = value >= 0 ? value : throw new ArgumentOutOfRangeException(nameof(MaxThreads), value, "expected 0 (all cores) or a positive count");
    }

    internal ParallelOptions Parallelism => MaxThreads > 0
        ? new ParallelOptions { MaxDegreeOfParallelism = MaxThreads }
        : Assay.Kernels.CpuKernels.DefaultParallelism;

    /// <summary>The options of <c>assay next</c>: logits at the last position, no hidden states.</summary>
    public static ForwardOptions LastLogits { get; } = new();
}
