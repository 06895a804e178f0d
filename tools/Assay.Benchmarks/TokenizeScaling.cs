using System.Globalization;
using Assay.Tokenization;
using Microsoft.ML.Tokenizers;

namespace Assay.Benchmarks;

/// <summary>
/// Tokenization time of one line without a split point (letters only: one pre-token) against its length: the
/// engine's encoder (256-character pieces) and one Microsoft.ML.Tokenizers call on the whole line (quadratic, so it
/// stops at 128 KiB). Medians of 3; the ratio of the two at each length is measured in this run.
/// </summary>
internal static class TokenizeScaling
{
    public static int Run(TextWriter o)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        o.WriteLine($"CPU: {Machine.Cpu}, {Environment.ProcessorCount} cores; one thread; medians of 3");
        o.WriteLine();
        o.WriteLine("| line (KiB) | engine (s) | engine ns/char | one library call (s) | one call / engine |");
        o.WriteLine("|---:|---:|---:|---:|---:|");
        TextTokenizer engine = TextTokenizer.EmbeddedGpt2();
        Tokenizer library = TiktokenTokenizer.CreateForModel("gpt2");
        foreach (int kib in new[] { 32, 64, 128, 256, 512, 1024 })
        {
            string line = string.Concat(Enumerable.Repeat("qzxv", kib * 256));
            double ours = FmaPeak.Median(3, () => engine.Encode(line));
            string one = "", ratio = "";
            if (kib <= 128)
            {
                double theirs = FmaPeak.Median(3, () => library.EncodeToIds(line));
                one = theirs.ToString("F3", inv);
                ratio = (theirs / ours).ToString("F0", inv) + "×";
            }
            o.WriteLine(string.Create(inv, $"| {kib:N0} | {ours:F3} | {ours / line.Length * 1e9:F0} | {one} | {ratio} |"));
        }
        return 0;
    }
}
