namespace Assay.Features;

/// <summary>The element type of an output array.</summary>
public enum FeatureElement
{
    /// <summary>Floating point (float32 in memory; float32 or float16 on disk).</summary>
    Real,

    /// <summary>Token ids, int32.</summary>
    TokenId,
}

/// <summary>One array an extraction writes: its name (the .npy file stem), the shape of one row, and its element type.</summary>
public sealed record FeatureOutput(string Name, int Width, FeatureElement Element, FeatureRequest Request);
