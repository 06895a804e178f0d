namespace Assay.Weights;

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

    /// <summary>
    /// The four projection matrices of every block in int8 with one scale per output column (symmetric, the largest
    /// magnitude of the column maps to 127), multiplied against activations quantized per row to 8 bits on the fly, in
    /// integer dot products (AVX-VNNI where the CPU has it); the embedding and output head are held in bfloat16. A
    /// quarter of the projection memory; the largest drift of the three (see README).
    /// </summary>
    Integer8,
}
