using System.Diagnostics;
using Assay.Cli.Commands;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Cli;

/// <summary>
/// A full disk (a 3 MiB tmpfs) and a read-only folder (a read-only tmpfs), each under a real <c>assay extract</c>
/// child process: a one-line error naming the folder and saying how to go on, exit code 74, nothing committed lost,
/// and after room is made a resume that ends byte-identical to an uninterrupted run. Needs root for mount(8), as CI has.
/// </summary>
public sealed class WriteFailureDrillTests
{
    [Fact]
    public void A_full_disk_stops_with_a_clear_error_and_the_run_resumes_to_the_same_bytes()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 400);
        string[] common = ["extract", input, "--model", Checkpoints.Folder(FeatureExtractorTests.Spec), "--features", "hidden,nextword,cmean", "--commit-rows", "16"];
        Assert.Equal(0, Child([.. common, "--out", temp.File("whole")]).ExitCode);

        string disk = temp.File("disk");
        Directory.CreateDirectory(disk);
        Mount($"-t tmpfs -o size=300k tmpfs {disk}");
        try
        {
            string run = Path.Combine(disk, "run");
            (int code, string stderr) = Child([.. common, "--out", run]);
            Assert.Equal(ExtractCommand.WriteFailed, code);
            Assert.Contains($"cannot write the run folder {run}", stderr, StringComparison.Ordinal);
            Assert.Contains("No space left on device", stderr, StringComparison.Ordinal);
            Assert.Contains("--resume", stderr, StringComparison.Ordinal);
            Assert.DoesNotContain("   at ", stderr, StringComparison.Ordinal);   // no stack trace
            Assert.True(File.Exists(Path.Combine(run, RunFolder.ProgressFile)));

            Mount($"-o remount,size=64m {disk}");
            Assert.Equal(0, Child([.. common, "--out", run, "--resume"]).ExitCode);
            Dictionary<string, byte[]> expected = ExtractionRunTests.Bytes(temp.File("whole")), actual = ExtractionRunTests.Bytes(run);
            Assert.Equal(expected.Keys.Order(), actual.Keys.Order());
            Assert.All(expected, f => Assert.True(f.Value.AsSpan().SequenceEqual(actual[f.Key]), $"{f.Key} differs after the full-disk stop"));
        }
        finally
        {
            Mount($"-l {disk}", command: "umount");
        }
    }

    [Fact]
    public void A_read_only_folder_is_refused_with_a_clear_error()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 10);
        string folder = temp.File("ro");
        Directory.CreateDirectory(folder);
        Mount($"-t tmpfs -o ro,size=1m tmpfs {folder}");
        try
        {
            string run = Path.Combine(folder, "run");
            (int code, string stderr) = Child(["extract", input, "--model", Checkpoints.Folder(FeatureExtractorTests.Spec), "--out", run]);
            Assert.Equal(ExtractCommand.WriteFailed, code);
            Assert.Contains($"cannot write the run folder {run}", stderr, StringComparison.Ordinal);
            Assert.Contains("Read-only file system", stderr, StringComparison.Ordinal);
            Assert.DoesNotContain("   at ", stderr, StringComparison.Ordinal);
        }
        finally
        {
            Mount($"-l {folder}", command: "umount");
        }
    }

    private static void Mount(string arguments, string command = "mount")
    {
        var psi = new ProcessStartInfo(command, arguments) { RedirectStandardError = true };
        using Process p = Process.Start(psi)!;
        string err = p.StandardError.ReadToEnd();
        p.WaitForExit();
        Assert.True(p.ExitCode == 0, $"{command} {arguments} failed ({p.ExitCode}): {err}; this drill needs root (CI runs as root)");
    }

    private static (int ExitCode, string Stderr) Child(string[] args)
    {
        using Process p = ExtractCommandTests.StartChild(args);
        Task<string> stdout = p.StandardOutput.ReadToEndAsync();
        string stderr = p.StandardError.ReadToEnd();
        p.WaitForExit();
        _ = stdout.Result;
        return (p.ExitCode, stderr);
    }
}
