using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Config;
using Assay.Features;
using Assay.Fixtures;
using Assay.Model;

namespace Assay.Benchmarks;

/// <summary>
/// Time and peak memory of <c>assay extract</c> at N and k·N rows, each size run several times in fresh child
/// processes (peak RSS as the run itself records it in timing.json); medians, and the ratios k·N / N. Linear time
/// gives a time ratio near k; memory that does not grow with the rows gives a memory ratio near 1. Peak RSS is also
/// set against the bytes the opened model's parameters take in memory (<see cref="LanguageModel.WeightBytes"/>) and an
/// estimate of the forward pass's activations at the token budget.
/// </summary>
internal static class ExtractScaling
{
    public static int Run(string? model, string shape, string weights, int rows, int factor, int repeats, string features, TextWriter o)
    {
        CheckpointSpec spec = shape switch
        {
            "demo" => CheckpointSpec.Demo,
            "gpt2-small" => CheckpointSpec.Gpt2Small,
            "llama-1b" => CheckpointSpec.Llama1B,
            "llama-8b" => CheckpointSpec.Llama8B,
            _ => throw new ArgumentException($"--shape {shape}: expected demo, gpt2-small, llama-1b or llama-8b"),
        };
        string work = Path.Combine(Path.GetTempPath(), "assay-bench-" + Environment.ProcessId.ToString(CultureInfo.InvariantCulture));
        Directory.CreateDirectory(work);
        try
        {
            if (model == null)
            {
                model = Path.Combine(work, shape + "-model");
                SyntheticCheckpoint.Write(spec, model);
            }
            var results = new List<(int Rows, double Seconds, double PeakMiB, double TokensPerSecond)>();
            foreach (int n in new[] { rows, rows * factor })
            {
                string input = Path.Combine(work, $"input-{n}.jsonl");
                WriteInput(input, n);
                var seconds = new List<double>();
                var peaks = new List<double>();
                var rates = new List<double>();
                for (int r = 0; r < repeats; r++)
                {
                    string run = Path.Combine(work, $"run-{n}-{r}");
                    Extract(model, input, run, features, weights);
                    using var timing = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(run, "timing.json")));
                    seconds.Add(timing.RootElement.GetProperty("seconds").GetDouble());
                    peaks.Add(timing.RootElement.GetProperty("peak_rss_bytes").GetInt64() / (1024.0 * 1024.0));
                    rates.Add(timing.RootElement.GetProperty("tokens_per_second").GetDouble());
                    Directory.Delete(run, recursive: true);
                }
                results.Add((n, Median(seconds), Median(peaks), Median(rates)));
            }

            // Time to the first feature row: a one-text extract, the whole process (start, open, tokenize, one pass, write).
            string one = Path.Combine(work, "input-1.jsonl");
            WriteInput(one, 1);
            var firstRow = new List<double>();
            for (int r = 0; r < repeats; r++)
            {
                string run = Path.Combine(work, $"run-first-{r}");
                long start = Stopwatch.GetTimestamp();
                Extract(model, one, run, features, weights);
                firstRow.Add(Stopwatch.GetElapsedTime(start).TotalSeconds);
                Directory.Delete(run, recursive: true);
            }

            long openStart = Stopwatch.GetTimestamp();
            LanguageModel opened = LanguageModel.Open(model, ModelOption.ParseWeights(weights), new ExtractionOptions().TokenBudget);
            double openSeconds = Stopwatch.GetElapsedTime(openStart).TotalSeconds;
            double weightMiB = opened.WeightBytes / (1024.0 * 1024.0);
            // The engine's own estimate of the forward pass's buffers at the default token budget (the one its memory check uses).
            ModelConfig c = opened.Config;
            double activationMiB = LanguageModel.ActivationBytesFor(c, new ExtractionOptions().TokenBudget) / (1024.0 * 1024.0);
            CultureInfo inv = CultureInfo.InvariantCulture;
            o.WriteLine(Machine.Describe() + " (the extract processes inherit ASSAY_KERNELS, so they take the same)");
            o.WriteLine(string.Create(inv, $"assay extract, features {features}, model {Path.GetFileName(model)} ({c.Layers} layers, width {c.Width}), --weights {weights}; medians of {repeats} runs each"));
            o.WriteLine(string.Create(inv, $"parameters in memory {weightMiB:F0} MiB; forward-pass activations at the token budget ≈ {activationMiB:F0} MiB"));
            o.WriteLine(string.Create(inv, $"time to the first feature row (one-text extract, whole process) {Median(firstRow):F2} s (runs {string.Join(", ", firstRow.Select(x => x.ToString("F2", inv)))}); LanguageModel.Open in process {openSeconds:F2} s; page cache warm"));
            o.WriteLine();
            o.WriteLine("| rows | seconds | tokens/s | peak RSS (MiB) | peak RSS / (parameters + activations) |");
            o.WriteLine("|---:|---:|---:|---:|---:|");
            foreach (var r in results)
            {
                o.WriteLine(string.Create(inv, $"| {r.Rows:N0} | {r.Seconds:F2} | {r.TokensPerSecond:N0} | {r.PeakMiB:F0} | {r.PeakMiB / (weightMiB + activationMiB):F2} |"));
            }
            o.WriteLine(string.Create(inv,
                $"ratios {factor}N / N: time {results[1].Seconds / results[0].Seconds:F2} (linear: {factor}), peak memory {results[1].PeakMiB / results[0].PeakMiB:F2} (flat: 1)"));
            return 0;
        }
        finally
        {
            Directory.Delete(work, recursive: true);
        }
    }

    /// <summary>JSONL of synthetic texts of 4 to 60 words drawn from a fixed pool (lengths, not meaning, set the cost).</summary>
    private static void WriteInput(string path, int rows)
    {
        string[] pool = ["lamp", "tide", "harbour", "keeper", "rope", "signal", "storm", "north", "light", "boat", "bell", "fog",
            "stone", "tower", "night", "watch", "coast", "reef", "wind", "oil"];
        var rng = new DeterministicRandom(7);
        using var w = new StreamWriter(path);
        for (int i = 0; i < rows; i++)
        {
            int words = 4 + (int)(rng.NextUnit() * 57);
            var text = string.Join(' ', Enumerable.Range(0, words).Select(_ => pool[(int)(rng.NextUnit() * pool.Length) % pool.Length]));
            w.WriteLine(JsonSerializer.Serialize(new { id = i, text, label = i % 5 }));
        }
    }

    private static void Extract(string model, string input, string run, string features, string weights)
    {
        var psi = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true };
        foreach (string a in new[] { Path.Combine(AppContext.BaseDirectory, "assay.dll"), "extract", input, "--model", model, "--out", run, "--features", features, "--weights", weights, "--prompt", "{text} It is a kind of" })
        {
            psi.ArgumentList.Add(a);
        }
        using Process p = Process.Start(psi)!;
        Task<string> err = p.StandardError.ReadToEndAsync();
        p.StandardOutput.ReadToEnd();
        p.WaitForExit();
        if (p.ExitCode != 0)
        {
            throw new InvalidOperationException($"assay extract exited {p.ExitCode}: {err.Result}");
        }
    }

    private static double Median(List<double> values)
    {
        double[] v = [.. values.Order()];
        return v.Length % 2 == 1 ? v[v.Length / 2] : (v[(v.Length / 2) - 1] + v[v.Length / 2]) / 2;
    }
}
