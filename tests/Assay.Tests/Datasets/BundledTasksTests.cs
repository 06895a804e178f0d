using System.Diagnostics;
using Assay.Tests.Model;
using Assay.Tests.Support;

namespace Assay.Tests.Datasets;

/// <summary>The task files shipped in src/Assay.Cli/tasks are exactly what the dataset builder makes from the Debian data.</summary>
public sealed class BundledTasksTests
{
    [Theory]
    [InlineData("wordnet-supersense")]
    [InlineData("fortune-topics")]
    public void Bundled_task_is_the_builder_output(string task)
    {
        using var temp = new TempFolder();
        RunBuilder(task, temp.Path);
        string bundled = Path.Combine(Path.GetDirectoryName(WeightsManifestPinTests.RepositoryManifest())!, "src", "Assay.Cli", "tasks", task);
        string[] names = [.. Directory.GetFiles(bundled).Select(Path.GetFileName).Order()!];
        Assert.Equal(names, Directory.GetFiles(temp.Path).Select(Path.GetFileName).Order());
        foreach (string name in names)
        {
            Assert.True(File.ReadAllBytes(Path.Combine(bundled, name)).AsSpan().SequenceEqual(File.ReadAllBytes(temp.File(name))),
                $"{task}/{name} differs from the builder's output; rebuild it with dotnet run --project tools/Assay.Datasets -c Release -- {task} src/Assay.Cli/tasks/{task}");
        }
    }

    /// <summary>
    /// The lines are shuffled: in the first 10 % of each file, every label's share is within 4 binomial standard
    /// deviations of its share of the whole file (sampling without replacement is tighter still; common practice). The
    /// builder's source order (by synset offset, by fortune file) groups the labels and fails this at once.
    /// </summary>
    [Theory]
    [InlineData("wordnet-supersense", "train.jsonl")]
    [InlineData("wordnet-supersense", "test.jsonl")]
    [InlineData("fortune-topics", "train.jsonl")]
    [InlineData("fortune-topics", "test.jsonl")]
    public void The_first_lines_of_a_task_file_are_a_fair_sample_of_its_labels(string task, string file)
    {
        string path = Path.Combine(Path.GetDirectoryName(WeightsManifestPinTests.RepositoryManifest())!, "src", "Assay.Cli", "tasks", task, file);
        string[] labels = [.. File.ReadLines(path).Select(l => System.Text.Json.JsonDocument.Parse(l).RootElement.GetProperty("label").GetString()!)];
        int n = labels.Length / 10;
        foreach (IGrouping<string, string> label in labels.GroupBy(l => l, StringComparer.Ordinal))
        {
            double p = label.Count() / (double)labels.Length;
            double head = labels.Take(n).Count(l => l == label.Key) / (double)n;
            double sd = Math.Sqrt(p * (1 - p) / n);
            Assert.True(Math.Abs(head - p) <= 4 * sd, $"{task}/{file}: \"{label.Key}\" is {head:P1} of the first {n} lines but {p:P1} of the file");
        }
    }

    private static void RunBuilder(string task, string output)
    {
        var psi = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true };
        foreach (string a in new[] { Path.Combine(AppContext.BaseDirectory, "assay-datasets.dll"), task, output })
        {
            psi.ArgumentList.Add(a);
        }
        using Process p = Process.Start(psi)!;
        string err = p.StandardError.ReadToEnd();
        p.StandardOutput.ReadToEnd();
        p.WaitForExit();
        Assert.True(p.ExitCode == 0, err);
    }
}
