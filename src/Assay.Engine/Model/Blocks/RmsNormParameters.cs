using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>RMSNorm with a gain, in float32: y = x / √(mean(x²) + ε) · γ over each row.</summary>
internal sealed record RmsNormParameters(float[] Gain, float Epsilon) : INorm
{
    public long Bytes => 4L * Gain.LongLength;

    public void Apply(float[] x, float[] y, int rows, ForwardBatch batch)
    {
        int d = Gain.Length;
        batch.ForRowBlocks(rows, (first, count) =>
            CpuKernels.RmsNorm(x.AsSpan(first * d, count * d), y.AsSpan(first * d, count * d), count, Gain, Epsilon));
    }
}
