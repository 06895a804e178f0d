using Assay.Kernels;

namespace Assay.Tests.Kernels;

public sealed class KernelSelectorTests
{
    [Fact]
    public void Picks_the_widest_supported_path_by_default()
    {
        KernelVariant expected = KernelSelector.IsSupported(KernelVariant.Vector512) ? KernelVariant.Vector512
            : KernelSelector.IsSupported(KernelVariant.Vector256) ? KernelVariant.Vector256
            : KernelSelector.IsSupported(KernelVariant.Vector128) ? KernelVariant.Vector128 : KernelVariant.Scalar;
        // The fastest integer path the CPU has, never scalar where a vector one exists (the fallback that once hid).
        Int8Kernel int8 = expected < KernelVariant.Vector256 ? Int8Kernel.Scalar
            : System.Runtime.Intrinsics.X86.AvxVnni.IsSupported ? Int8Kernel.AvxVnni
            : expected == KernelVariant.Vector512 && System.Runtime.Intrinsics.X86.Avx512BW.IsSupported ? Int8Kernel.Avx512BW
            : System.Runtime.Intrinsics.X86.Avx2.IsSupported ? Int8Kernel.Avx2 : Int8Kernel.Scalar;
        Assert.Equal((expected, int8), KernelSelector.Select(null));
    }

    [Theory]
    [InlineData("scalar", KernelVariant.Scalar, Int8Kernel.Scalar)]
    [InlineData("SCALAR", KernelVariant.Scalar, Int8Kernel.Scalar)]
    [InlineData("scalar:scalar", KernelVariant.Scalar, Int8Kernel.Scalar)]
    [InlineData("vector128", KernelVariant.Vector128, Int8Kernel.Scalar)]
    public void Honours_a_forced_variant(string value, KernelVariant expected, Int8Kernel integerPath)
    {
        if (KernelSelector.IsSupported(expected))
        {
            Assert.Equal((expected, integerPath), KernelSelector.Select(value));
        }
        else
        {
            // As under DOTNET_EnableHWIntrinsic=0: a path the CPU does not accelerate is refused, never run slowly.
            Assert.Contains("does not accelerate", Assert.Throws<InvalidOperationException>(() => KernelSelector.Select(value)).Message, StringComparison.Ordinal);
        }
    }

    [Fact]
    public void Forces_the_int8_path_independently_of_the_width()
    {
        KernelVariant widest = KernelSelector.Select(null).Float;
        Assert.Equal((widest, Int8Kernel.Scalar), KernelSelector.Select(widest + ":scalar"));
        if (KernelSelector.IsSupported(Int8Kernel.Avx2))
        {
            Assert.Equal((KernelVariant.Scalar, Int8Kernel.Avx2), KernelSelector.Select("scalar:avx2"));
        }
        if (KernelSelector.IsSupported(Int8Kernel.Avx512BW))
        {
            Assert.Equal((KernelVariant.Vector256, Int8Kernel.Avx512BW), KernelSelector.Select("vector256:AVX512BW"));
        }
        if (KernelSelector.IsSupported(Int8Kernel.AvxVnni))
        {
            Assert.Equal((KernelVariant.Scalar, Int8Kernel.AvxVnni), KernelSelector.Select("scalar:avxvnni"));
        }
        else
        {
            var e = Assert.Throws<InvalidOperationException>(() => KernelSelector.Select("scalar:avxvnni"));
            Assert.Contains("does not have AvxVnni", e.Message, StringComparison.Ordinal);
            // Asked directly of the GEMM, a path the CPU lacks is refused too, never run as the slow scalar one.
            var packed = PackedMatrix.FromRowMajor(new float[8 * 4], 8, 4, null, Assay.Weights.WeightPrecision.Integer8);
            var g = Assert.Throws<ArgumentException>(() => CpuKernels.Gemm(new float[8], 1, 8, packed, new float[4], 4, accumulate: false, KernelVariant.Scalar, int8: Int8Kernel.AvxVnni));
            Assert.Contains("does not have the int8 path AvxVnni", g.Message, StringComparison.Ordinal);
        }
    }

    [Theory]
    [InlineData("avx9000")]
    [InlineData("7")]
    [InlineData("1")]
    [InlineData("vector256:")]
    [InlineData("vector256:vnni512")]
    [InlineData("vector256:1")]
    public void Refuses_an_unknown_variant(string value)
    {
        var e = Assert.Throws<InvalidOperationException>(() => KernelSelector.Select(value));
        Assert.Contains(KernelSelector.EnvironmentVariable, e.Message, StringComparison.Ordinal);
    }
}
