using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>LayerNorm with a gain and a bias: y = (x − mean) / √(var + ε) · γ + β over each row.</summary>
internal sealed record LayerNormParameters(float[] Gain, float[] Bias, float Epsilon)
{
    /// <summary>Bytes the gain and bias take.</summary>
    public long Bytes => 4L * (Gain.LongLength + Bias.LongLength);

    /// <summary>Normalizes the first <paramref name="rows"/> rows of <paramref name="x"/> into <paramref name="y"/>, rows spread over the workers.</summary>
    public void Apply(float[] x, float[] y, int rows, ForwardBatch batch)
    {
        int d = Gain.Length;
        batch.ForRowBlocks(rows, (first, count) =>
            CpuKernels.LayerNorm(x.AsSpan(first * d, count * d), y.AsSpan(first * d, count * d), count, Gain, Bias, Epsilon));
    }
}
