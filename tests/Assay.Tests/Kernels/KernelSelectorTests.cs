using Assay.Kernels;

namespace Assay.Tests.Kernels;

public sealed class KernelSelectorTests
{
    [Fact]
    public void Picks_the_widest_supported_path_by_default()
    {
        KernelVariant expected = KernelSelector.IsSupported(KernelVariant.Vector512) ? KernelVariant.Vector512
            : KernelSelector.IsSupported(KernelVariant.Vector256) ? KernelVariant.Vector256 : KernelVariant.Scalar;
        Assert.Equal(expected, KernelSelector.Select(null));
    }

    [Theory]
    [InlineData("scalar", KernelVariant.Scalar)]
    [InlineData("SCALAR", KernelVariant.Scalar)]
    public void Honours_a_forced_variant(string value, KernelVariant expected) =>
        Assert.Equal(expected, KernelSelector.Select(value));

    [Theory]
    [InlineData("avx9000")]
    [InlineData("7")]
    public void Refuses_an_unknown_variant(string value)
    {
        var e = Assert.Throws<InvalidOperationException>(() => KernelSelector.Select(value));
        Assert.Contains(KernelSelector.EnvironmentVariable, e.Message, StringComparison.Ordinal);
    }
}
