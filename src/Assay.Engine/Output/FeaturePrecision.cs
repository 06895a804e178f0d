namespace Assay.Output;

/// <summary>How floating features are stored on disk.</summary>
public enum FeaturePrecision
{
    /// <summary>IEEE float32 (NumPy &lt;f4), exactly the values computed.</summary>
    Binary32,

    /// <summary>IEEE float16 (NumPy &lt;f2), rounded to nearest: half the disk, about 3 significant digits.</summary>
    Binary16,
}
