using System.Diagnostics;
using Assay.Output;
using Assay.Tests.Cli;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Slurm;

/// <summary>
/// The Slurm recipe (tools/slurm) on a real single-node Slurm from Debian's packages (slurmctld, slurmd, slurm-client,
/// munge; started by cluster.sh on loopback): a 4-task array and its dependent merge job, submitted with sbatch, give
/// a folder byte-identical to a single-process run; a shard whose task fails leaves the merge job cancelled and
/// assay merge refusing. Needs root and those packages, as CI has (tools/test.sh installs them).
/// </summary>
public sealed class SlurmArrayTests
{
    private static readonly string[] Extract = ["--features", "hidden,topk:3,cmean", "--prompt", "{text} It is a kind of", "--commit-rows", "5"];

    [Fact]
    public void A_four_shard_array_and_its_merge_job_equal_a_single_run_and_a_failed_shard_stops_the_merge()
    {
        using var temp = new TempFolder();
        string cluster = Path.Combine(AppContext.BaseDirectory, "Slurm", "cluster.sh");
        string slurmConf = temp.File("slurm/etc/slurm.conf");
        (int started, string startLog) = Bash(temp, slurmConf, cluster, "start", temp.File("slurm"));
        Assert.True(started == 0, $"the single-node Slurm did not start (exit {started}):\n{startLog}");
        try
        {
            string model = Checkpoints.Folder(FeatureExtractorTests.Spec);
            string input = ExtractionRunTests.WriteInput(temp, 23);
            (int single, _) = Assay(["extract", input, "--model", model, "--out", temp.File("single"), "--shard", "1/1", .. Extract]);
            Assert.Equal(0, single);

            (int submitted, string log) = Submit(temp, slurmConf, model, input, "runs", "merged");
            Assert.True(submitted == 0, $"submit.sh --wait exited {submitted}:\n{log}");
            Dictionary<string, byte[]> expected = ExtractionRunTests.Bytes(temp.File("single"));
            Dictionary<string, byte[]> merged = ExtractionRunTests.Bytes(temp.File("merged"));
            Assert.True(merged.Remove(RunFolder.MergeFile));
            Assert.Equal(expected.Keys.Order(), merged.Keys.Order());
            Assert.All(expected, f => Assert.True(f.Value.AsSpan().SequenceEqual(merged[f.Key]), $"{f.Key} differs from the single run"));
            for (int k = 1; k <= 4; k++)
            {
                Assert.True(File.Exists(temp.File($"runs/shard-{k}-of-4/{RunFolder.RecordFile}")), $"shard {k} has no record");
            }

            // Shard 3's folder holds a file of someone else's: its task exits 2, and the merge job never runs.
            Directory.CreateDirectory(temp.File("runs2/shard-3-of-4"));
            File.WriteAllText(temp.File("runs2/shard-3-of-4/notes.txt"), "not a run");
            (int failed, string failLog) = Submit(temp, slurmConf, model, input, "runs2", "merged2");
            Assert.True(failed != 0, $"submit.sh --wait succeeded with a failed shard:\n{failLog}");
            Assert.Contains("ended CANCELLED", failLog, StringComparison.Ordinal);
            Assert.False(Directory.Exists(temp.File("merged2")));
            Assert.Contains("holds files that are not part of a run", File.ReadAllText(temp.File("runs2/logs/task-2.log")), StringComparison.Ordinal);

            // Merging those folders by hand is refused, naming the shard, and writes nothing.
            (int refused, string refusal) = Assay(["merge", .. Enumerable.Range(1, 4).Select(k => temp.File($"runs2/shard-{k}-of-4")), "--out", temp.File("merged2")]);
            Assert.Equal(2, refused);
            Assert.Contains("shard-3-of-4: holds no finished run", refusal, StringComparison.Ordinal);
            Assert.False(Directory.Exists(temp.File("merged2")));
        }
        finally
        {
            Bash(temp, slurmConf, cluster, "stop", temp.File("slurm"));
        }
    }

    private static (int ExitCode, string Output) Submit(TempFolder temp, string slurmConf, string model, string input, string runs, string merged) =>
        Bash(temp, slurmConf, Path.Combine(AppContext.BaseDirectory, "SlurmRecipe", "submit.sh"),
            ["--shards", "4", "--cpus", "1", "--model", model, "--input", input, "--runs", temp.File(runs), "--out", temp.File(merged), "--wait",
            "--", .. Extract]);

    private static (int ExitCode, string Output) Bash(TempFolder temp, string slurmConf, string script, params string[] args)
    {
        var psi = new ProcessStartInfo("bash") { RedirectStandardOutput = true, RedirectStandardError = true, WorkingDirectory = temp.Path };
        psi.ArgumentList.Add(script);
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        psi.Environment["SLURM_CONF"] = slurmConf;
        psi.Environment["ASSAY"] = $"dotnet {Path.Combine(AppContext.BaseDirectory, "assay.dll")}";
        using Process p = Process.Start(psi)!;
        Task<string> stdout = p.StandardOutput.ReadToEndAsync(), stderr = p.StandardError.ReadToEndAsync();
        if (!p.WaitForExit(TimeSpan.FromMinutes(5)))
        {
            p.Kill(entireProcessTree: true);
            return (-1, $"timed out after 5 minutes\n{stdout.Result}\n{stderr.Result}");
        }
        return (p.ExitCode, stdout.Result + stderr.Result);
    }

    private static (int ExitCode, string Output) Assay(string[] args)
    {
        using Process p = ExtractCommandTests.StartChild(args);
        Task<string> stdout = p.StandardOutput.ReadToEndAsync(), stderr = p.StandardError.ReadToEndAsync();
        p.WaitForExit();
        return (p.ExitCode, stdout.Result + stderr.Result);
    }
}
