using System.Globalization;

namespace Assay.Config;

/// <summary>How rotary frequencies are stretched for contexts longer than the training context (config "rope_scaling").</summary>
public enum RotaryScalingKind
{
    /// <summary>No scaling: θ_i = base^(−2i/r).</summary>
    None,

    /// <summary>Every frequency divided by the factor (rope_type "linear": positions compressed by the factor).</summary>
    Linear,

    /// <summary>
    /// rope_type "llama3": with λ_i = 2π/θ_i, L = original context, low = L / low_freq_factor, high = L / high_freq_factor:
    /// θ_i unchanged where λ_i &lt; high, θ_i / factor where λ_i &gt; low, and between them
    /// (1 − s)·θ_i/factor + s·θ_i with s = (L/λ_i − low_freq_factor) / (high_freq_factor − low_freq_factor).
    /// </summary>
    Llama3,
}

/// <summary>
/// Rotary position embeddings: the first <see cref="Dimensions"/> dimensions of every query and key head are rotated in
/// pairs (i, i + r/2), i &lt; r/2 (the half-split convention of these checkpoints), by the angle p·θ_i at position p,
/// θ_i = <see cref="Base"/>^(−2i/r) before <see cref="Scaling"/>; the other dimensions pass unrotated.
/// </summary>
/// <param name="Dimensions">r, the rotated dimensions of each head (even; the head width unless partial).</param>
/// <param name="Base">The frequency base (config "rope_theta" or "rotary_emb_base").</param>
/// <param name="Scaling">How frequencies are rescaled.</param>
/// <param name="Factor">The scaling factor (1 without scaling).</param>
/// <param name="LowFrequencyFactor">llama3's low_freq_factor (0 otherwise).</param>
/// <param name="HighFrequencyFactor">llama3's high_freq_factor (0 otherwise).</param>
/// <param name="OriginalContext">llama3's original_max_position_embeddings (0 otherwise).</param>
public sealed record RotaryPositions(int Dimensions, double Base, RotaryScalingKind Scaling = RotaryScalingKind.None, double Factor = 1,
    double LowFrequencyFactor = 0, double HighFrequencyFactor = 0, int OriginalContext = 0)
{
    /// <summary>
    /// θ_0 … θ_{r/2−1} after scaling, in float64 (the angle p·θ_i and its cosine and sine are computed in float64 and
    /// rounded to float32 once; published float32 implementations differ from this by up to about p·2⁻²⁴ radians).
    /// </summary>
    public double[] Frequencies()
    {
        int pairs = Dimensions / 2;
        double[] theta = new double[pairs];
        for (int i = 0; i < pairs; i++)
        {
            double f = 1.0 / Math.Pow(Base, 2.0 * i / Dimensions);
            theta[i] = Scaling switch
            {
                RotaryScalingKind.Linear => f / Factor,
                RotaryScalingKind.Llama3 => Llama3(f),
                _ => f,
            };
        }
        return theta;
    }

    private double Llama3(double f)
    {
        double wavelength = 2 * Math.PI / f;
        double low = OriginalContext / LowFrequencyFactor, high = OriginalContext / HighFrequencyFactor;
        if (wavelength < high)
        {
            return f;
        }
        if (wavelength > low)
        {
            return f / Factor;
        }
        double s = ((OriginalContext / wavelength) - LowFrequencyFactor) / (HighFrequencyFactor - LowFrequencyFactor);
        return ((1 - s) * f / Factor) + (s * f);
    }

    /// <summary>One line for inspect: dimensions, base and scaling.</summary>
    public override string ToString() => string.Create(CultureInfo.InvariantCulture, $"rotary on {Dimensions} dims per head (half-split), base {Base:G}") + Scaling switch
    {
        RotaryScalingKind.Linear => string.Create(CultureInfo.InvariantCulture, $", linear scaling ×{Factor:G}"),
        RotaryScalingKind.Llama3 => string.Create(CultureInfo.InvariantCulture,
            $", llama3 scaling ×{Factor:G} (low {LowFrequencyFactor:G}, high {HighFrequencyFactor:G}, original context {OriginalContext})"),
        _ => "",
    };
}
