using System.Globalization;
using Assay.Kernels;

namespace Assay.Benchmarks;

/// <summary>
/// The attention kernel alone, by sequence length: every head of one layer over one sequence on one thread, at GPT-2
/// small's heads (12 of width 64) and a Llama-style 1B shape's (32 query heads on 8 key/value heads of width 64), set
/// against the one-thread FMA peak measured in the same run. Its multiply-adds per token grow linearly with the length
/// (on average (T + 1) / 2 keys), so a kernel whose cost grows with its arithmetic and no faster keeps the same share of
/// the peak at every length.
/// </summary>
internal static class AttentionScaling
{
    public static int Run(int repeats, TextWriter o)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        KernelVariant variant = KernelSelector.Current;
        double peak = FmaPeak.Measure(1);
        o.WriteLine(Machine.Describe());
        o.WriteLine(string.Create(inv, $"one thread, {variant}; FMA peak {peak:F1} GFLOP/s; medians of {repeats} after a warm-up"));
        o.WriteLine();
        o.WriteLine("| heads | length | ms per layer | GFLOP/s | of the peak | µs per token |");
        o.WriteLine("|---|---:|---:|---:|---:|---:|");
        foreach ((string name, AttentionShape shape) in new[] { ("12 × 64", new AttentionShape(12, 12, 64, 0)), ("32 on 8 × 64", new AttentionShape(32, 8, 64, 0)) })
        {
            foreach (int length in new[] { 128, 256, 512, 1024, 2048, 4096 })
            {
                var rng = new Random(length);
                float[] qkv = new float[length * shape.RowWidth];
                for (int i = 0; i < qkv.Length; i++)
                {
                    qkv[i] = (float)(rng.NextDouble() - 0.5);
                }
                float[] output = new float[length * shape.Heads * shape.HeadWidth];
                var scratch = new AttentionScratch(shape, length);
                // Calls for a second and a half before timing, so the tiered JIT has replaced every kernel with its optimized code.
                var warm = System.Diagnostics.Stopwatch.StartNew();
                while (warm.Elapsed.TotalSeconds < 1.5)
                {
                    CpuKernels.CausalAttentionGroup(qkv, output, Math.Min(length, 128), shape, 0, 0, scratch.Blocks(Math.Min(length, 128)), scratch, variant);
                }
                double seconds = FmaPeak.Median(repeats, () =>
                {
                    for (int kv = 0; kv < shape.KeyValueHeads; kv++)
                    {
                        CpuKernels.CausalAttentionGroup(qkv, output, length, shape, kv, 0, scratch.Blocks(length), scratch, variant);
                    }
                });
                // Two products (q·k and p·v) of (T + 1) / 2 keys on average, per query head and position.
                double flops = 2.0 * 2 * shape.Heads * length * ((length + 1) / 2.0) * shape.HeadWidth;
                o.WriteLine(string.Create(inv,
                    $"| {name} | {length:N0} | {seconds * 1e3:F2} | {flops / seconds / 1e9:F1} | {flops / seconds / 1e9 / peak:P0} | {seconds * 1e6 / length:F2} |"));
            }
        }
        return 0;
    }
}
