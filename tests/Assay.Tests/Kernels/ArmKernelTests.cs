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

        public string Folder(string name) => Directory.CreateDirectory(_temp.File(name)).FullName;

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
    public void Dot_product_path_gives_the_scalar_bits_and_the_same_products_as_x86_64()
    {
        Assert.Equal(Architecture.X64, RuntimeInformation.ProcessArchitecture);
        string x64Values = _arm.Folder("x64"), armValues = _arm.Folder("arm64");
        var x64 = new StringWriter();
        Assert.Equal(0, KernelCheck.KernelCheck.Run(_arm.Model, x64Values, x64));
        // "max": every feature qemu 7.2 emulates, the dot-product extension (FEAT_DotProd) among them.
        string arm = _arm.Run("max", "--model", _arm.Model, "--values", armValues);

        Assert.Contains("Arm64", Lines(arm)[0]);
        Assert.Contains("float paths Scalar, Vector128 (default Vector128); int8 paths Scalar, ArmDot (default ArmDot)", Lines(arm)[0]);
        Assert.DoesNotContain("DIFFERS", arm);
        Assert.Equal("every path gave the scalar path's bits", Lines(arm)[^1]);
        // The products are exact integer sums (int8) or in-order float32 chains (float32, bfloat16, Φp) on every path, so
        // the Arm64 build gives x86-64's bits.
        foreach (string check in new[] { "gemm float32", "gemm bfloat16", "gemm int8", "conditional mean" })
        {
            Assert.Equal(Digest(x64.ToString(), check), Digest(arm, check));
        }
        // The features of the whole forward pass agree to float32 rounding only: TensorPrimitives' sums (layer norms,
        // softmax) add in the order of the machine's widest vector, 128 bits here against 256 or 512 on x86-64.
        foreach (string weights in new[] { "float32", "int8" })
        {
            float[] expected = Floats(Path.Combine(x64Values, weights + ".bin")), actual = Floats(Path.Combine(armValues, weights + ".bin"));
            Assert.Equal(expected.Length, actual.Length);
            Assert.True(expected.Length > 1000, $"{weights}: {expected.Length} values");
            double scale = expected.Max(MathF.Abs);
            double worst = expected.Zip(actual, (e, a) => Math.Abs(e - (double)a)).Max();
            // int8 rounds activations to 255 levels, where a last-bit difference can move a value by one step.
            double bound = weights == "float32" ? 1e-5 : 1e-2;
            Assert.True(worst <= bound * scale, $"{weights}: Arm64 features differ from x86-64's by {worst:G3} (largest magnitude {scale:G3})");
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
        Assert.Equal(0, KernelCheck.KernelCheck.Run(null, null, x64));
        Assert.Equal(Digest(x64.ToString(), "gemm int8"), Digest(arm, "gemm int8"));
    }

    private static string[] Lines(string text) => text.Split('\n', StringSplitOptions.RemoveEmptyEntries);

    private static string Digest(string output, string check)
    {
        string line = Assert.Single(Lines(output), l => l.StartsWith(check + ":", StringComparison.Ordinal));
        return line[(line.LastIndexOf("digest ", StringComparison.Ordinal) + 7)..];
    }

    private static float[] Floats(string path) => MemoryMarshal.Cast<byte, float>(File.ReadAllBytes(path)).ToArray();
}
