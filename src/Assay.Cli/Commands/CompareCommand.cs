using System.CommandLine;
using System.Globalization;
using System.Text.Json.Nodes;
using Assay.Evaluation;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay compare A B</c>: a paired bootstrap of two report folders' predictions on the same test rows (two probes,
/// a probe and zero-shot, two layers or checkpoints): the accuracy and log-loss differences A − B with their 95 %
/// intervals and the share of resamples each side wins.
/// </summary>
internal static class CompareCommand
{
    public static Command Create()
    {
        var a = new Argument<FileSystemInfo>("a") { Description = "A report folder written by assay probe or assay zero-shot (its predictions.csv), or a predictions file (a layer sweep's predictions.layerK.csv)." };
        var b = new Argument<FileSystemInfo>("b") { Description = "Another, scored on the same test rows." };
        var resamples = new Option<int>("--resamples") { Description = "Paired bootstrap resamples.", DefaultValueFactory = _ => 1000 };
        var seed = new Option<ulong>("--seed") { Description = "Seed of the resampling.", DefaultValueFactory = _ => 1 };
        var json = new Option<bool>("--json") { Description = "Write one JSON object instead of the text." };
        var command = new Command("compare", "Compare two reports on the same test rows by a paired bootstrap: accuracy and log-loss differences with 95 % intervals, and how often each side wins.")
        {
            a, b, resamples, seed, json,
        };
        command.SetAction(r => CommandRunner.Run(() => Run(r.GetValue(a)!.FullName, r.GetValue(b)!.FullName, r.GetValue(resamples), r.GetValue(seed), r.GetValue(json), Console.Out)));
        return command;
    }

    internal static int Run(string a, string b, int resamples, ulong seed, bool json, TextWriter o)
    {
        if (resamples < 1)
        {
            throw new ArgumentException($"--resamples {resamples}: expected a positive number");
        }
        PredictionTable pa = PredictionTable.Read(PredictionsPath(a));
        PredictionTable pb = PredictionTable.Read(PredictionsPath(b));
        (double[] pbAligned, int[] truth) = Align(a, pa, b, pb);
        PairedComparison c = PairedComparison.Compare(pa.Probabilities, pbAligned, truth, pa.Classes.Count, resamples, seed);
        if (json)
        {
            o.WriteLine(c.ToJson(a, b).ToJsonString(JsonOutput.Options));
            return 0;
        }
        CultureInfo inv = CultureInfo.InvariantCulture;
        o.WriteLine($"A: {a}{Describe(a)}");
        o.WriteLine($"B: {b}{Describe(b)}");
        o.WriteLine(string.Create(inv, $"{c.Rows:N0} test rows, {c.Samples:N0} paired resamples (seed {seed})"));
        o.WriteLine("                  A          B      A − B   95 % interval of A − B   A better   B better");
        o.WriteLine(string.Create(inv,
            $"accuracy  {c.AccuracyA,9:P2}  {c.AccuracyB,9:P2}  {100 * c.AccuracyDifference,+8:+0.00;-0.00;0.00}   {100 * c.AccuracyLow,+9:+0.00;-0.00;0.00} … {100 * c.AccuracyHigh,+8:+0.00;-0.00;0.00} pt  {c.AccuracyABetter,9:P1}  {c.AccuracyBBetter,9:P1}"));
        o.WriteLine(string.Create(inv,
            $"log loss  {c.LogLossA,9:F4}  {c.LogLossB,9:F4}  {c.LogLossDifference,8:+0.0000;-0.0000;0.0000}   {c.LogLossLow,9:+0.0000;-0.0000;0.0000} … {c.LogLossHigh,8:+0.0000;-0.0000;0.0000}     {c.LogLossABetter,9:P1}  {c.LogLossBBetter,9:P1}"));
        o.WriteLine(Verdict("accuracy", c.AccuracyLow, c.AccuracyHigh, higherIsBetter: true));
        o.WriteLine(Verdict("log loss", c.LogLossLow, c.LogLossHigh, higherIsBetter: false));
        return 0;
    }

    /// <summary>
    /// B's probabilities in A's class order and the true classes, after checking both score the same rows with the
    /// same labels in the same order and know the same classes.
    /// </summary>
    private static (double[] B, int[] Truth) Align(string a, PredictionTable pa, string b, PredictionTable pb)
    {
        if (pa.Ids.Count != pb.Ids.Count)
        {
            throw new ArgumentException($"{a} scores {pa.Ids.Count:N0} rows and {b} {pb.Ids.Count:N0}; a paired comparison needs the same test rows");
        }
        for (int i = 0; i < pa.Ids.Count; i++)
        {
            if (pa.Ids[i] != pb.Ids[i] || pa.Labels[i] != pb.Labels[i])
            {
                throw new ArgumentException($"row {i + 1} of the predictions differs: id \"{pa.Ids[i]}\" label \"{pa.Labels[i]}\" in {a}, id \"{pb.Ids[i]}\" label \"{pb.Labels[i]}\" in {b}; a paired comparison needs the same test rows in the same order");
            }
        }
        if (!pa.Classes.Order(StringComparer.Ordinal).SequenceEqual(pb.Classes.Order(StringComparer.Ordinal), StringComparer.Ordinal))
        {
            throw new ArgumentException($"{a} predicts the classes {string.Join(", ", pa.Classes)} and {b} {string.Join(", ", pb.Classes)}; they must be the same");
        }
        int k = pa.Classes.Count;
        var bColumns = pb.Classes.ToList();
        int[] column = [.. pa.Classes.Select(c => bColumns.IndexOf(c))];
        double[] aligned = new double[pb.Probabilities.Length];
        for (int i = 0; i < pb.Ids.Count; i++)
        {
            for (int j = 0; j < k; j++)
            {
                aligned[(i * k) + j] = pb.Probabilities[(i * k) + column[j]];
            }
        }
        var index = new Dictionary<string, int>(StringComparer.Ordinal);
        for (int j = 0; j < k; j++)
        {
            index[pa.Classes[j]] = j;
        }
        int[] truth = new int[pa.Ids.Count];
        for (int i = 0; i < truth.Length; i++)
        {
            truth[i] = index.TryGetValue(pa.Labels[i], out int t) ? t
                : throw new ArgumentException($"row {i + 1} of {a}: label \"{pa.Labels[i]}\" is not one of the predicted classes, so the row cannot be scored");
        }
        return (aligned, truth);
    }

    /// <summary>A report folder's predictions file, or the file itself.</summary>
    private static string PredictionsPath(string path) => Directory.Exists(path) ? Path.Combine(path, ReportFolder.PredictionsFile) : path;

    /// <summary>What the report folder's report.json says was scored, when it says it (nothing for a file named directly).</summary>
    private static string Describe(string folder)
    {
        if (!Directory.Exists(folder))
        {
            return "";
        }
        string path = Path.Combine(folder, ReportFolder.ReportFile);
        try
        {
            JsonNode? report = File.Exists(path) ? JsonNode.Parse(File.ReadAllText(path)) : null;
            return report?["prompt"]?.GetValue<string>() is string prompt ? $" (zero-shot, prompt \"{prompt}\")"
                : report?["feature"]?.GetValue<string>() is string feature ? $" (probe of {feature})" : "";
        }
        catch (Exception e) when (e is System.Text.Json.JsonException or InvalidOperationException)
        {
            return "";
        }
    }

    private static string Verdict(string metric, double low, double high, bool higherIsBetter)
    {
        if (low <= 0 && high >= 0)
        {
            return $"{metric}: the interval includes 0; these rows show no difference either way";
        }
        bool aAhead = higherIsBetter ? low > 0 : high < 0;
        return $"{metric}: {(aAhead ? "A" : "B")} is better; the whole interval is on its side";
    }
}
