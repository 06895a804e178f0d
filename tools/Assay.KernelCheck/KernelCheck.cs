using System.Globalization;
using System.Runtime.InteropServices;
using System.Security.Cryptography;
using Assay.Config;
using Assay.Features;
using Assay.Kernels;
using Assay.Model;
using Assay.Weights;

namespace Assay.KernelCheck;

/// <summary>
/// Runs the GEMM (float32, bfloat16 and int8 panels, with bias, accumulation and a fused activation), Φp and attention
/// on every kernel path this CPU has, and compares each output with the scalar path's bits; then, given a model, extracts
/// features of fixed texts in float32 and int8 on the default paths. Every check prints a digest of its outputs (the
/// first 16 hex digits of their SHA-256), so runs on two machines can be compared line by line.
/// </summary>
public static class KernelCheck
{
    /// <summary>The texts the model check extracts features of.</summary>
    private static readonly string[] Texts =
    [
        "a hand tool with a heavy rigid head and a handle",
        "the act of moving something from one place to another",
        "a large body of water surrounded by land",
    ];

    /// <summary>(M, N, K) of the GEMM checks: ragged edges of every tile and panel, and a transformer-like shape.</summary>
    private static readonly (int M, int N, int K)[] GemmShapes =
    [
        (1, 1, 1), (1, 65, 3), (5, 17, 4), (7, 64, 9), (13, 70, 97), (31, 129, 64), (50, 200, 96), (64, 300, 255), (96, 768, 256),
    ];

    /// <summary>(length, width, heads, key/value heads, window) of the attention checks.</summary>
    private static readonly (int Length, int Width, int Heads, int KvHeads, int Window)[] AttentionShapes =
    [
        (1, 16, 2, 2, 0), (37, 48, 4, 4, 0), (70, 64, 4, 2, 0), (130, 96, 6, 2, 9), (300, 64, 1, 1, 0),
    ];

    /// <summary>Runs the checks, writing one line each to <paramref name="output"/>; 0 when every path gave the scalar bits, else 1.</summary>
    public static int Run(string? modelFolder, TextWriter output)
    {
        ArgumentNullException.ThrowIfNull(output);
        KernelVariant[] variants = [.. Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported)];
        Int8Kernel[] integer = [.. Enum.GetValues<Int8Kernel>().Where(KernelSelector.IsSupported)];
        output.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"assay-kernel-check: {RuntimeInformation.ProcessArchitecture}, CPU {KernelSelector.CpuModel}; float paths {string.Join(", ", variants)} (default {KernelSelector.Current}); int8 paths {string.Join(", ", integer)} (default {KernelSelector.CurrentInt8})"));
        int failures = 0;
        foreach (WeightPrecision precision in new[] { WeightPrecision.Binary32, WeightPrecision.BFloat16, WeightPrecision.Integer8 })
        {
            failures += Gemm(precision, variants, integer, output);
        }
        failures += Sums(variants, output);
        failures += ConditionalMean(variants, output);
        failures += Attention(variants, output);
        if (modelFolder is not null)
        {
            foreach (WeightPrecision precision in new[] { WeightPrecision.Binary32, WeightPrecision.Integer8 })
            {
                Model(modelFolder, precision, output);
            }
        }
        output.WriteLine(failures == 0 ? "every path gave the scalar path's bits" : $"{failures} checks differ from the scalar path");
        return failures == 0 ? 0 : 1;
    }

    private static int Gemm(WeightPrecision precision, KernelVariant[] variants, Int8Kernel[] integer, TextWriter output)
    {
        var rng = new SplitMix(17 + (ulong)precision);
        var digest = new Digest();
        int failures = 0, compared = 0;
        foreach ((int m, int n, int k) in GemmShapes)
        {
            float[] a = rng.Floats(m * k), b = rng.Floats(k * n), bias = rng.Floats(n), c0 = rng.Floats(m * n);
            PackedMatrix packed = PackedMatrix.FromRowMajor(b, k, n, bias, precision);
            float[][] scalar = Products(a, m, k, packed, c0, KernelVariant.Scalar, Int8Kernel.Scalar);
            foreach (float[] s in scalar)
            {
                digest.Add(s);
            }
            foreach (KernelVariant variant in variants)
            {
                foreach (Int8Kernel path in precision == WeightPrecision.Integer8 ? integer : [Int8Kernel.Scalar])
                {
                    float[][] got = Products(a, m, k, packed, c0, variant, path);
                    for (int i = 0; i < got.Length; i++)
                    {
                        compared++;
                        string name = precision == WeightPrecision.Integer8 ? $"{variant}:{path}" : variant.ToString();
                        failures += Compare(output, $"gemm {Spellings.Of(precision)} {name} m={m} n={n} k={k} ({ProductNames[i]})", scalar[i], got[i]);
                    }
                }
            }
        }
        output.WriteLine($"gemm {Spellings.Of(precision)}: {GemmShapes.Length} shapes, {compared} products compared with the scalar path, {(failures == 0 ? "same bits" : $"{failures} differ")}; digest {digest}");
        return failures;
    }

    private static readonly string[] ProductNames = ["plain", "accumulated", "GELU fused"];

    /// <summary>C = A·B + bias, C0 + A·B + bias, and gelu(A·B + bias) on one path.</summary>
    private static float[][] Products(float[] a, int m, int k, PackedMatrix b, float[] c0, KernelVariant variant, Int8Kernel path)
    {
        int n = b.Columns;
        float[] plain = new float[m * n], accumulated = (float[])c0.Clone(), fused = new float[m * n];
        CpuKernels.Gemm(a, m, k, b, plain, n, accumulate: false, variant, int8: path);
        CpuKernels.Gemm(a, m, k, b, accumulated, n, accumulate: true, variant, int8: path);
        CpuKernels.Gemm(a, m, k, b, fused, n, accumulate: false, variant, epilogue: Activation.GeluTanh, int8: path);
        return [plain, accumulated, fused];
    }

    private static int Sums(KernelVariant[] variants, TextWriter output)
    {
        var rng = new SplitMix(23);
        var digest = new Digest();
        int failures = 0;
        foreach (int n in new[] { 1, 15, 16, 17, 100, 768, 4099 })
        {
            float[] x = rng.Floats(n);
            foreach (bool squares in new[] { false, true })
            {
                float[] scalar = [CpuKernels.LaneSum(x, squares, KernelVariant.Scalar)];
                digest.Add(scalar);
                foreach (KernelVariant variant in variants)
                {
                    failures += Compare(output, $"sum{(squares ? " of squares" : "")} {variant} n={n}", scalar, [CpuKernels.LaneSum(x, squares, variant)]);
                }
            }
        }
        output.WriteLine($"sums: 7 lengths, plain and of squares, {(failures == 0 ? "same bits" : $"{failures} differ")}; digest {digest}");
        return failures;
    }

    private static int ConditionalMean(KernelVariant[] variants, TextWriter output)
    {
        var rng = new SplitMix(29);
        var digest = new Digest();
        int failures = 0;
        foreach ((int rows, int d, int v) in new[] { (1, 8, 5), (3, 48, 300), (4, 64, 1000) })
        {
            float[] p = rng.Floats(rows * v).Select(MathF.Abs).ToArray(), et = rng.Floats(v * d);
            foreach (WeightPrecision precision in new[] { WeightPrecision.Binary32, WeightPrecision.BFloat16 })
            {
                PackedMatrix table = PackedMatrix.FromTransposed(et, d, v, precision: precision);
                float[] scalar = new float[rows * d];
                CpuKernels.ConditionalMean(p, rows, table, scalar, KernelVariant.Scalar);
                digest.Add(scalar);
                foreach (KernelVariant variant in variants)
                {
                    float[] got = new float[rows * d];
                    CpuKernels.ConditionalMean(p, rows, table, got, variant);
                    failures += Compare(output, $"conditional mean {Spellings.Of(precision)} {variant} rows={rows} d={d} V={v}", scalar, got);
                }
            }
        }
        output.WriteLine($"conditional mean: 3 shapes in float32 and bfloat16, {(failures == 0 ? "same bits" : $"{failures} differ")}; digest {digest}");
        return failures;
    }

    private static int Attention(KernelVariant[] variants, TextWriter output)
    {
        var rng = new SplitMix(31);
        var digest = new Digest();
        int failures = 0;
        foreach ((int length, int width, int heads, int kvHeads, int window) in AttentionShapes)
        {
            var shape = new AttentionShape(heads, kvHeads, width / heads, window);
            float[] qkv = rng.Floats(length * shape.RowWidth);
            var scratch = new AttentionScratch(shape, length);
            float[] Run(KernelVariant variant)
            {
                float[] o = new float[length * width];
                for (int kv = 0; kv < kvHeads; kv++)
                {
                    CpuKernels.CausalAttentionGroup(qkv, o, length, shape, kv, 0, scratch.Blocks(length), scratch, variant);
                }
                return o;
            }
            float[] scalar = Run(KernelVariant.Scalar);
            digest.Add(scalar);
            foreach (KernelVariant variant in variants)
            {
                failures += Compare(output, $"attention {variant} {shape} over {length}", scalar, Run(variant));
            }
        }
        output.WriteLine($"attention: {AttentionShapes.Length} shapes, {(failures == 0 ? "same bits" : $"{failures} differ")}; digest {digest}");
        return failures;
    }

    /// <summary>Hidden states (every layer, last position) and Φp of <see cref="Texts"/> on this process's default paths.</summary>
    private static void Model(string folder, WeightPrecision precision, TextWriter output)
    {
        LanguageModel model = LanguageModel.Open(folder, precision);
        var extractor = new FeatureExtractor(model, new ExtractionOptions
        {
            Prompt = PromptTemplate.Parse("{text} It is a kind of"),
            Features = [.. Enumerable.Range(0, model.Config.Layers + 1).Select(l => new HiddenStateFeature(l)), new ConditionalMeanFeature()],
        });
        var digest = new Digest();
        int rows = 0;
        foreach (FeatureRow row in extractor.Extract(Texts))
        {
            for (int o = 0; o < extractor.Outputs.Count; o++)
            {
                digest.Add(row.Values(o));
            }
            rows++;
        }
        output.WriteLine($"model {Path.GetFileName(Path.TrimEndingDirectorySeparator(Path.GetFullPath(folder)))} {Spellings.Of(precision)}: {rows} texts, {extractor.Outputs.Count} outputs each; digest {digest}");
    }

    private static int Compare(TextWriter output, string what, float[] expected, float[] actual)
    {
        int differ = 0, first = -1;
        for (int i = 0; i < expected.Length; i++)
        {
            if (BitConverter.SingleToInt32Bits(expected[i]) != BitConverter.SingleToInt32Bits(actual[i]))
            {
                differ++;
                first = first < 0 ? i : first;
            }
        }
        if (differ > 0)
        {
            output.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"DIFFERS: {what}: {differ} of {expected.Length} values, first at {first}: {actual[first]:R} against the scalar path's {expected[first]:R}"));
        }
        return differ > 0 ? 1 : 0;
    }

    /// <summary>SHA-256 over float32 values in their little-endian bytes.</summary>
    private sealed class Digest
    {
        private readonly IncrementalHash _hash = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);

        public void Add(ReadOnlySpan<float> values) => _hash.AppendData(MemoryMarshal.AsBytes(values));

        public override string ToString() => Convert.ToHexStringLower(_hash.GetHashAndReset())[..16];
    }

    /// <summary>SplitMix64 (common practice), mapped to floats in [−1, 1).</summary>
    private struct SplitMix(ulong seed)
    {
        private ulong _state = seed;

        public float[] Floats(int count)
        {
            float[] values = new float[count];
            for (int i = 0; i < count; i++)
            {
                ulong z = _state += 0x9E3779B97F4A7C15UL;
                z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL;
                z = (z ^ (z >> 27)) * 0x94D049BB133111EBUL;
                z ^= z >> 31;
                values[i] = (float)((z >> 40) * (1.0 / (1UL << 23)) - 1.0);
            }
            return values;
        }
    }
}
