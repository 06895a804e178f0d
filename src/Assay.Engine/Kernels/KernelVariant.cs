namespace Assay.Kernels;

/// <summary>The vector widths of the float32 kernels (GEMM micro-tiles, attention lanes, Φp lanes).</summary>
public enum KernelVariant
{
    /// <summary>Plain scalar code; runs everywhere.</summary>
    Scalar,

    /// <summary>128-bit vectors (SSE on x86, AdvSimd on Arm64): the widest accelerated path on most Arm64 laptops.</summary>
    Vector128,

    /// <summary>256-bit vectors (AVX2 + FMA on x86).</summary>
    Vector256,

    /// <summary>512-bit vectors (AVX-512F).</summary>
    Vector512,
}
