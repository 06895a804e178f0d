namespace Assay.Model;

/// <summary>How an opened model holds its matrix weights in memory. Arithmetic is float32 either way.</summary>
public enum WeightPrecision
{
    /// <summary>IEEE float32: the reference, and the default.</summary>
    Binary32,

    /// <summary>
    /// bfloat16 (the upper 16 bits of a float32, rounded to nearest even): half the memory and memory traffic for the
    /// projection matrices and the embedding/head; widened back to float32 in the kernels. Norm gains, biases and position
    /// embeddings stay float32. A checkpoint stored in BF16 loses nothing.
    /// </summary>
    BFloat16,
}
