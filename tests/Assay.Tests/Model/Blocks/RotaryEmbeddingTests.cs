using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;

namespace Assay.Tests.Model.Blocks;

/// <summary>Rotary positions against values worked by hand, and the llama3 frequency rule against its published formula.</summary>
public sealed class RotaryEmbeddingTests
{
    /// <summary>
    /// Head width 4, base 10000: θ₀ = 1, θ₁ = 10000^(−1/2) = 0.01; pairs (x₀, x₂) and (x₁, x₃). For x = (1, 2, 3, 4),
    /// worked by hand with cos 1 = 0.5403023, sin 1 = 0.8414710, cos 0.01 = 0.99995, sin 0.01 = 0.0099998,
    /// cos 1000 = 0.5623791, sin 1000 = 0.8268795, cos 10 = −0.8390715, sin 10 = −0.5440211 (values from memory):
    /// position 0 leaves x as it is; position 1 gives (1·cos1 − 3·sin1, 2·cos.01 − 4·sin.01, 3·cos1 + 1·sin1, 4·cos.01 + 2·sin.01);
    /// position 1000 the same with angles 1000 and 10.
    /// </summary>
    [Fact]
    public void Rotates_half_split_pairs_by_position_times_frequency()
    {
        var rotary = new RotaryEmbedding(new RotaryPositions(4, 10000), contextLength: 2048);
        int length = 1001;
        float[] qkv = new float[length * 4];
        foreach (int p in new[] { 0, 1, 1000 })
        {
            new float[] { 1, 2, 3, 4 }.CopyTo(qkv, p * 4);
        }
        var batch = new ForwardBatch([0], [length], length, KernelVariant.Scalar, new ParallelOptions());
        rotary.Apply(qkv, rowWidth: 4, heads: 1, headWidth: 4, batch);

        Assert.Equal([1f, 2f, 3f, 4f], qkv[0..4]);
        AssertClose([-1.984111, 1.959901, 2.462378, 4.019800], qkv.AsSpan(4, 4));
        AssertClose([-1.918260, 0.497941, 2.514017, -4.444328], qkv.AsSpan(4000, 4));
    }

    /// <summary>Partial rotary (NeoX): only the first r dimensions of each head turn; a second head turns alike.</summary>
    [Fact]
    public void Partial_rotary_leaves_the_rest_of_each_head()
    {
        var rotary = new RotaryEmbedding(new RotaryPositions(2, 10000), contextLength: 8);
        float[] qkv = new float[2 * 6];
        float[] row = [1, 2, 3, 1, 2, 3];
        row.CopyTo(qkv, 6);
        var batch = new ForwardBatch([0], [2], 2, KernelVariant.Scalar, new ParallelOptions());
        rotary.Apply(qkv, rowWidth: 6, heads: 2, headWidth: 3, batch);
        // Position 1, θ₀ = 1: (x₀, x₁) → (1·cos1 − 2·sin1, 2·cos1 + 1·sin1) = (−1.142640, 1.922076); x₂ unchanged.
        AssertClose([-1.142640, 1.922076, 3, -1.142640, 1.922076, 3], qkv.AsSpan(6, 6));
    }

    /// <summary>
    /// The llama3 rule as published (from memory): with λ = 2π/θ, low = L/low_freq_factor, high = L/high_freq_factor:
    /// θ where λ &lt; high, θ/factor where λ &gt; low, else (1 − s)·θ/factor + s·θ with s = (L/λ − low_freq_factor)/(high_freq_factor − low_freq_factor).
    /// Llama-3.2's values: base 500000, 64 dims, factor 32, factors 1 and 4, L = 8192.
    /// </summary>
    [Fact]
    public void Llama3_frequencies_follow_the_published_rule()
    {
        double[] f = new RotaryPositions(64, 500000, RotaryScalingKind.Llama3, 32, 1, 4, 8192).Frequencies();
        double[] plain = new RotaryPositions(64, 500000).Frequencies();
        Assert.Equal(32, f.Length);
        for (int i = 0; i < 32; i++)
        {
            Assert.Equal(Math.Pow(500000, -2.0 * i / 64), plain[i], 15);
            double wavelength = 2 * Math.PI / plain[i];
            double expected = wavelength < 8192 / 4.0 ? plain[i]
                : wavelength > 8192 / 1.0 ? plain[i] / 32
                : ((1 - (((8192 / wavelength) - 1) / 3)) * plain[i] / 32) + (((8192 / wavelength) - 1) / 3 * plain[i]);
            Assert.Equal(expected, f[i], 15);
        }
        // One of each band, worked by hand: i = 0 kept (λ = 6.28), i = 16 smoothed (λ = 4442.9, s = 0.281285), i = 31 divided.
        Assert.Equal(1.0, f[0], 15);
        Assert.Equal(0.0014142136 * 0.3037448, f[16], 8);
        Assert.Equal(plain[31] / 32, f[31], 15);
    }

    [Fact]
    public void Linear_scaling_divides_every_frequency()
    {
        double[] f = new RotaryPositions(8, 10000, RotaryScalingKind.Linear, 4).Frequencies();
        Assert.Equal([0.25, 0.025, 0.0025, 0.00025], f.Select(x => Math.Round(x, 12)));
    }

    private static void AssertClose(double[] expected, ReadOnlySpan<float> actual)
    {
        for (int i = 0; i < expected.Length; i++)
        {
            Assert.True(Math.Abs(actual[i] - expected[i]) < 2e-6, $"element {i}: {actual[i]} vs {expected[i]} (worked by hand)");
        }
    }
}
