namespace Assay.Features;

/// <summary>One array an extraction writes: its name (the .npy file stem), the shape of one row, and its element type.</summary>
public sealed record FeatureOutput(string Name, int Width, FeatureElement Element, FeatureRequest Request);
