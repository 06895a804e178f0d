using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>LayerNorm with a gain and a bias: y = (x − mean) / √(var + ε) · γ + β over each row.</summary>
internal sealed record LayerNormParameters(float[] Gain, float[] Bias, float Epsilon) : INorm
{
    /// <summary>Bytes the gain and bias take.</summary>
    public long Bytes => 4L * (Gain.LongLength + Bias.LongLength);

    public void Apply(float[] x, float[] y, int rows, ForwardBatch batch)
    {
        int d = Gain.Length;
        batch.ForRowBlocks(rows, (first, count) =>
            CpuKernels.LayerNorm(x.AsSpan(first * d, count * d), y.AsSpan(first * d, count * d), count, Gain, Bias, Epsilon));
    }
}
