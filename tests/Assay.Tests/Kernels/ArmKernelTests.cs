using System.Runtime.InteropServices;
using Assay.Tests.Support;

namespace Assay.Tests.Kernels;

/// <summary>
/// The Arm64 build, run under user-mode emulation (Debian's qemu-user-static, with Debian's arm64 C libraries): the
/// kernel checker (tools/Assay.KernelCheck) published self-contained for linux-arm64 runs every kernel path the emulated
/// CPU has against the scalar path's bits, and its outputs are compared with this x86-64 process's. Emulation tells
/// whether the Arm64 code is right, not how fast it is.
/// </summary>
public sealed class ArmKernelTests : IClassFixture<ArmKernelTests.Published>
{
    private readonly Published _arm;

    public ArmKernelTests(Published arm) => _arm = arm;

    /// <summary>The checker published for linux-arm64 into a temporary folder (the tree's bin/ and obj/ are not touched).</summary>
    public sealed class Published : IDisposable
    {
        private readonly TempFolder _temp = new();

        public Published()
        {
            string root = Tests.Model.WeightsManifestPinTests.RepositoryRoot();
            ChildProcess.Run("dotnet", ["publish", Path.Combine(root, "tools", "Assay.KernelCheck", "Assay.KernelCheck.csproj"), "-c", "Release",
                "-r", "linux-arm64", "--self-contained", "--artifacts-path", _temp.File("artifacts"), "-o", _temp.File("out"), "-nologo", "-v", "quiet"], root);
            Checker = _temp.File(Path.Combine("out", "assay-kernel-check"));
            Model = Path.Combine(AppContext.BaseDirectory, "models", "assay-demo");
        }

        public string Checker { get; }

        public string Model { get; }

        /// <summary>
        /// The checker under qemu-aarch64 as <paramref name="cpu"/>. .NET's W^X double mapping of JIT code is turned off:
        /// under user-mode emulation it crashes at random (seen here with qemu 7.2); on Arm64 hardware it is not needed.
        /// </summary>
        public string Run(string cpu, params string[] args) =>
            ChildProcess.Run("qemu-aarch64-static", ["-cpu", cpu, Checker, .. args], Path.GetDirectoryName(Checker)!,
                new Dictionary<string, string> { ["DOTNET_EnableWriteXorExecute"] = "0" });

        public void Dispose() => _temp.Dispose();
    }

    [Fact]
    public void Dot_product_path_gives_the_scalar_bits_and_the_same_features_as_x86_64()
    {
        Assert.Equal(Architecture.X64, RuntimeInformation.ProcessArchitecture);
        var x64 = new StringWriter();
        Assert.Equal(0, KernelCheck.KernelCheck.Run(_arm.Model, x64));
        // "max": every feature qemu 7.2 emulates, the dot-product extension (FEAT_DotProd) among them.
        string arm = _arm.Run("max", "--model", _arm.Model);

        Assert.Contains("Arm64", Lines(arm)[0]);
        Assert.Contains("float paths Scalar, Vector128 (default Vector128); int8 paths Scalar, ArmDot (default ArmDot)", Lines(arm)[0]);
        Assert.DoesNotContain("DIFFERS", arm);
        Assert.Equal("every path gave the scalar path's bits", Lines(arm)[^1]);
        // Products are exact integer sums (int8) or in-order float32 chains, and the norms' and softmax's sums run in one
        // lane order on every vector width, so the Arm64 build gives this machine's bits, down to the bundled model's
        // features of three texts (every layer's hidden state and Φp) in float32 and in int8.
        foreach (string check in new[] { "gemm float32", "gemm bfloat16", "gemm int8", "sums", "conditional mean", "attention", "model assay-demo float32", "model assay-demo int8" })
        {
            Assert.Equal(Digest(x64.ToString(), check), Digest(arm, check));
        }
    }

    [Fact]
    public void Without_the_dot_product_extension_int8_takes_the_scalar_path_with_the_same_bits()
    {
        // Cortex-A72: Armv8.0 with AdvSimd, no dot product.
        string arm = _arm.Run("cortex-a72");
        Assert.Contains("float paths Scalar, Vector128 (default Vector128); int8 paths Scalar (default Scalar)", Lines(arm)[0]);
        Assert.Equal("every path gave the scalar path's bits", Lines(arm)[^1]);
        var x64 = new StringWriter();
        Assert.Equal(0, KernelCheck.KernelCheck.Run(null, x64));
        Assert.Equal(Digest(x64.ToString(), "gemm int8"), Digest(arm, "gemm int8"));
    }

    private static string[] Lines(string text) => text.Split('\n', StringSplitOptions.RemoveEmptyEntries);

    private static string Digest(string output, string check)
    {
        string line = Assert.Single(Lines(output), l => l.StartsWith(check + ":", StringComparison.Ordinal));
        return line[(line.LastIndexOf("digest ", StringComparison.Ordinal) + 7)..];
    }

}
