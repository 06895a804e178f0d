namespace Assay.Kernels;

/// <summary>The integer dot-product paths of the int8 GEMM. Every path computes the same exact integer sums.</summary>
public enum Int8Kernel
{
    /// <summary>Scalar integer code; runs everywhere.</summary>
    Scalar,

    /// <summary>AVX-VNNI 4-way byte dot products (vpdpbusd) on 256-bit vectors.</summary>
    AvxVnni,
}
