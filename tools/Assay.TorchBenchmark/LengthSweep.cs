using System.Diagnostics;
using System.Globalization;
using Assay.Fixtures;
using Assay.Model;
using Assay.Weights;
using static TorchSharp.torch;

namespace Assay.TorchBenchmark;

/// <summary>
/// Tokens per second by row length, in one process: the engine (float32 and int8) and libtorch (float32 and
/// bfloat16) on the same random weights and, at each length, the same batch of about <c>tokens</c> tokens
/// (⌈tokens / length⌉ rows of equal length; one row when the length is longer). Each system is warmed up once at the
/// shortest length, then timed <c>repeats</c> times per length; medians. Prints a Markdown table with the ratios;
/// libtorch's bfloat16 columns say "not run" when <c>torchBFloat16</c> is false.
/// </summary>
internal static class LengthSweep
{
    public static void Run(CheckpointSpec spec, string folder, int[] lengths, int tokens, int repeats, int threads,
        bool torchBFloat16, Func<ScalarType, ITorchModel> torchModel, TextWriter o)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        var rng = new DeterministicRandom(11);
        var batches = lengths.Select(length =>
        {
            int rows = Math.Max(1, tokens / length);
            int[][] sequences = [.. Enumerable.Range(0, rows).Select(_ => Enumerable.Range(0, length).Select(_ => (int)(rng.NextUInt64() % (ulong)spec.Vocabulary)).ToArray())];
            return (Length: length, Rows: rows, Sequences: sequences, Flat: sequences.SelectMany(s => s).Select(t => (long)t).ToArray());
        }).ToArray();

        double[] Time(Action<int> pass)
        {
            pass(0);
            return [.. batches.Select((_, i) => Median(repeats, () => pass(i)))];
        }

        var options = new ForwardOptions { Logits = LogitPositions.Last, MaxThreads = threads };
        double[] Engine(WeightPrecision precision)
        {
            LanguageModel engine = LanguageModel.Open(folder, precision);
            double[] seconds = Time(i => engine.Forward(batches[i].Sequences, options));
            Console.Error.WriteLine($"engine {precision}: " + string.Join(", ", seconds.Select(s => s.ToString("F3", inv))));
            return seconds;
        }
        double[] Torch(ScalarType type)
        {
            using ITorchModel model = torchModel(type);
            double[] seconds = Time(i => model.Forward(batches[i].Flat, batches[i].Rows, batches[i].Length));
            Console.Error.WriteLine($"libtorch {type}: " + string.Join(", ", seconds.Select(s => s.ToString("F3", inv))));
            return seconds;
        }
        double[] engine32 = Engine(WeightPrecision.Binary32);
        double[] engine8 = Engine(WeightPrecision.Integer8);
        double[] torch32 = Torch(ScalarType.Float32);
        double[]? torch16 = torchBFloat16 ? Torch(ScalarType.BFloat16) : null;

        o.WriteLine(string.Create(inv, $"Tokens/s by row length: about {tokens:N0} tokens a batch; {threads} threads; one warm-up per system, then medians of {repeats}."));
        o.WriteLine();
        o.WriteLine("| row length | rows | engine float32 | engine int8 | libtorch float32 | libtorch bfloat16 | engine f32 / libtorch f32 | engine int8 / libtorch bf16 |");
        o.WriteLine("|---:|---:|---:|---:|---:|---:|---:|---:|");
        for (int i = 0; i < batches.Length; i++)
        {
            double n = (double)batches[i].Rows * batches[i].Length;
            o.WriteLine(string.Create(inv,
                $"| {batches[i].Length:N0} | {batches[i].Rows} | {n / engine32[i]:F0} | {n / engine8[i]:F0} | {n / torch32[i]:F0} | {(torch16 is null ? "not run" : (n / torch16[i]).ToString("F0", inv))} | {torch32[i] / engine32[i]:F2} | {(torch16 is null ? "–" : (torch16[i] / engine8[i]).ToString("F2", inv))} |"));
        }
    }

    private static double Median(int repeats, Action run)
    {
        double[] s = new double[repeats];
        for (int r = 0; r < repeats; r++)
        {
            long start = Stopwatch.GetTimestamp();
            run();
            s[r] = Stopwatch.GetElapsedTime(start).TotalSeconds;
        }
        Array.Sort(s);
        return repeats % 2 == 1 ? s[repeats / 2] : (s[(repeats / 2) - 1] + s[repeats / 2]) / 2;
    }
}
