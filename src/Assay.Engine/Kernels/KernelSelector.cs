using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.Arm;
using System.Runtime.Intrinsics.X86;

namespace Assay.Kernels;

/// <summary>
/// Picks the kernel paths once at start-up: the widest hardware-accelerated vector width, in the order
/// Vector512 → Vector256 → Vector128 → Scalar, and for int8, where the float path is at least 256 bits wide, AVX-VNNI
/// where the CPU has it, else AVX-512BW under a 512-bit float path, else AVX2; on Arm64 the dot-product extension
/// under any vector float path; scalar otherwise. The environment variable <c>ASSAY_KERNELS</c> forces them as
/// <c>FLOAT[:INT8]</c> (<c>vector256</c>, <c>vector512:scalar</c>, <c>scalar</c>; the int8 part defaults as above
/// for the forced width), so the whole test suite can run on each; forcing a path the CPU lacks is an error.
/// </summary>
public static class KernelSelector
{
    /// <summary>The CPU model as /proc/cpuinfo names it ("unknown" where it does not; under emulation, the host's), for benchmark and check headers.</summary>
    internal static string CpuModel => File.Exists("/proc/cpuinfo")
        ? File.ReadLines("/proc/cpuinfo").FirstOrDefault(l => l.StartsWith("model name", StringComparison.Ordinal))?.Split(':', 2)[1].Trim() ?? "unknown"
        : "unknown";

    /// <summary>The name of the environment variable that forces a variant.</summary>
    public const string EnvironmentVariable = "ASSAY_KERNELS";

    // Chosen on first use; a bad ASSAY_KERNELS value is an InvalidOperationException naming it, every time it is used
    // (never a TypeInitializationException).
    private static readonly Lazy<(KernelVariant Float, Int8Kernel Int8)> Chosen = new(() => Select(Environment.GetEnvironmentVariable(EnvironmentVariable)));

    /// <summary>The float32 variant in use by this process.</summary>
    /// <exception cref="InvalidOperationException">ASSAY_KERNELS names no variant, or one the CPU lacks.</exception>
    public static KernelVariant Current => Chosen.Value.Float;

    /// <summary>The int8 path in use by this process.</summary>
    /// <exception cref="InvalidOperationException">ASSAY_KERNELS names no variant, or one the CPU lacks.</exception>
    public static Int8Kernel CurrentInt8 => Chosen.Value.Int8;

    /// <summary>What is wrong with the ASSAY_KERNELS setting of this process, or null when it is unset or valid.</summary>
    public static string? EnvironmentProblem
    {
        get
        {
            try
            {
                _ = Chosen.Value;
                return null;
            }
            catch (InvalidOperationException e)
            {
                return e.Message;
            }
        }
    }

    /// <summary>True when the CPU runs <paramref name="variant"/> in hardware.</summary>
    public static bool IsSupported(KernelVariant variant) => variant switch
    {
        KernelVariant.Vector512 => Vector512.IsHardwareAccelerated,
        KernelVariant.Vector256 => Vector256.IsHardwareAccelerated,
        KernelVariant.Vector128 => Vector128.IsHardwareAccelerated,
        _ => true,
    };

    /// <summary>True when the CPU runs <paramref name="kernel"/> in hardware.</summary>
    public static bool IsSupported(Int8Kernel kernel) => kernel switch
    {
        Int8Kernel.AvxVnni => AvxVnni.IsSupported,
        Int8Kernel.Avx512BW => Avx512BW.IsSupported,
        Int8Kernel.Avx2 => Avx2.IsSupported,
        Int8Kernel.ArmDot => Dp.IsSupported,
        _ => true,
    };

    /// <summary>The int8 path taken by default with a float path of width <paramref name="variant"/>.</summary>
    public static Int8Kernel DefaultInt8(KernelVariant variant) =>
        variant >= KernelVariant.Vector128 && IsSupported(Int8Kernel.ArmDot) ? Int8Kernel.ArmDot
        : variant < KernelVariant.Vector256 ? Int8Kernel.Scalar
        : IsSupported(Int8Kernel.AvxVnni) ? Int8Kernel.AvxVnni
        : variant == KernelVariant.Vector512 && IsSupported(Int8Kernel.Avx512BW) ? Int8Kernel.Avx512BW
        : IsSupported(Int8Kernel.Avx2) ? Int8Kernel.Avx2
        : Int8Kernel.Scalar;

    internal static (KernelVariant Float, Int8Kernel Int8) Select(string? forced)
    {
        if (string.IsNullOrEmpty(forced))
        {
            KernelVariant widest = IsSupported(KernelVariant.Vector512) ? KernelVariant.Vector512
                : IsSupported(KernelVariant.Vector256) ? KernelVariant.Vector256
                : IsSupported(KernelVariant.Vector128) ? KernelVariant.Vector128
                : KernelVariant.Scalar;
            return (widest, DefaultInt8(widest));
        }
        int colon = forced.IndexOf(':', StringComparison.Ordinal);
        string floatPart = colon < 0 ? forced : forced[..colon];
        if (!Enum.TryParse(floatPart, ignoreCase: true, out KernelVariant v) || !Enum.IsDefined(v) || !char.IsLetter(floatPart[0]))
        {
            throw new InvalidOperationException(
                $"{EnvironmentVariable}={forced} is not a kernel variant; use scalar, vector128, vector256 or vector512, optionally followed by :scalar, :avxvnni, :avx2, :avx512bw or :armdot for int8");
        }
        if (!IsSupported(v))
        {
            throw new InvalidOperationException($"{EnvironmentVariable}={forced}: this CPU does not accelerate {v}");
        }
        if (colon < 0)
        {
            return (v, DefaultInt8(v));
        }
        string int8Part = forced[(colon + 1)..];
        if (int8Part.Length == 0 || !char.IsLetter(int8Part[0]) || !Enum.TryParse(int8Part, ignoreCase: true, out Int8Kernel q) || !Enum.IsDefined(q))
        {
            throw new InvalidOperationException($"{EnvironmentVariable}={forced}: \"{int8Part}\" is not an int8 path; use scalar, avxvnni, avx2, avx512bw or armdot");
        }
        if (!IsSupported(q))
        {
            throw new InvalidOperationException($"{EnvironmentVariable}={forced}: this CPU does not have {q}");
        }
        return (v, q);
    }
}
