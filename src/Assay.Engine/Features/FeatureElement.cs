namespace Assay.Features;

/// <summary>The element type of an output array.</summary>
public enum FeatureElement
{
    /// <summary>Floating point (float32 in memory; float32 or float16 on disk).</summary>
    Real,

    /// <summary>Token ids, int32.</summary>
    TokenId,
}
