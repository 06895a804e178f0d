namespace Assay.Kernels;

/// <summary>The integer dot-product paths of the int8 GEMM. Every path computes the same exact integer sums.</summary>
public enum Int8Kernel
{
    /// <summary>Scalar integer code; runs everywhere.</summary>
    Scalar,

    /// <summary>AVX-VNNI 4-way byte dot products (vpdpbusd) on 256-bit vectors.</summary>
    AvxVnni,

    /// <summary>
    /// AVX2 on 256-bit vectors: the bytes widened to 16 bits (vpmovsxbw) and multiplied in adjacent pairs into 32-bit
    /// sums (vpmaddwd), which never saturates, unlike the byte form vpmaddubsw.
    /// </summary>
    Avx2,

    /// <summary>The <see cref="Avx2"/> path at 512 bits (AVX-512BW).</summary>
    Avx512BW,

    /// <summary>
    /// Arm64 signed byte dot products (SDOT, the dot-product extension of AdvSimd) on 128-bit vectors, from A's bytes
    /// centred once to the signed u − 128.
    /// </summary>
    ArmDot,
}
