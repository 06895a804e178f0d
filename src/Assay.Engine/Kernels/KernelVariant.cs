using System.Runtime.Intrinsics;

namespace Assay.Kernels;

/// <summary>The instruction-set paths of the matrix kernels.</summary>
public enum KernelVariant
{
    /// <summary>Plain scalar code; runs everywhere.</summary>
    Scalar,

    /// <summary>256-bit vectors (AVX2 + FMA on x86, or the platform's 256-bit path).</summary>
    Vector256,

    /// <summary>512-bit vectors (AVX-512F).</summary>
    Vector512,
}

/// <summary>
/// Picks the kernel path once at start-up: the widest hardware-accelerated vector width, in the order
/// Vector512 → Vector256 → Scalar. The environment variable <c>ASSAY_KERNELS</c> (scalar, vector256, vector512)
/// forces one, so the whole test suite can run on each; forcing a path the CPU lacks is an error.
/// </summary>
public static class KernelSelector
{
    /// <summary>The name of the environment variable that forces a variant.</summary>
    public const string EnvironmentVariable = "ASSAY_KERNELS";

    /// <summary>The variant in use by this process.</summary>
    public static KernelVariant Current { get; } = Select(Environment.GetEnvironmentVariable(EnvironmentVariable));

    /// <summary>True when the CPU runs <paramref name="variant"/> in hardware.</summary>
    public static bool IsSupported(KernelVariant variant) => variant switch
    {
        KernelVariant.Vector512 => Vector512.IsHardwareAccelerated,
        KernelVariant.Vector256 => Vector256.IsHardwareAccelerated,
        _ => true,
    };

    internal static KernelVariant Select(string? forced)
    {
        if (string.IsNullOrEmpty(forced))
        {
            return IsSupported(KernelVariant.Vector512) ? KernelVariant.Vector512
                : IsSupported(KernelVariant.Vector256) ? KernelVariant.Vector256
                : KernelVariant.Scalar;
        }
        if (!Enum.TryParse(forced, ignoreCase: true, out KernelVariant v) || !Enum.IsDefined(v))
        {
            throw new InvalidOperationException(
                $"{EnvironmentVariable}={forced} is not a kernel variant; use scalar, vector256 or vector512");
        }
        if (!IsSupported(v))
        {
            throw new InvalidOperationException($"{EnvironmentVariable}={forced}: this CPU does not accelerate {v}");
        }
        return v;
    }
}
