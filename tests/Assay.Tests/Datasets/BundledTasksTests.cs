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
