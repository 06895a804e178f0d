namespace Assay.Config;

/// <summary>The normalization of the blocks and of the final norm.</summary>
public enum NormKind
{
    /// <summary>y = (x − mean) / √(var + ε) · γ + β.</summary>
    LayerNorm,

    /// <summary>y = x / √(mean(x²) + ε) · γ, in float32.</summary>
    RmsNorm,
}
