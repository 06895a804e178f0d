using System.Diagnostics;
using Assay.Evaluation;
using Assay.Output;
using Assay.Tests.Cli;
using Assay.Tests.Features;
using Assay.Tests.Support;

namespace Assay.Tests.Output;

/// <summary>One writer per folder: a second writer is refused at once, naming the holder; the first one's run is whole.</summary>
public sealed class FolderLockTests
{
    [Fact]
    public async Task A_second_extract_into_a_running_folder_is_refused_with_the_holders_process_id()
    {
        // Real processes: the first extract runs (commits every 8 rows, long enough to be caught running); a second one
        // with --resume and a third with --overwrite are started into the same folder while it runs.
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 1500);
        string run = temp.File("run");
        string[] common = ["extract", input, "--model", Checkpoints.Folder(FeatureExtractorTests.Spec), "--prompt", "{text} It is a kind of",
            "--features", "hidden,cmean", "--commit-rows", "8", "--out", run];
        using Process first = ExtractCommandTests.StartChild(common);
        Task<string> firstErr = first.StandardError.ReadToEndAsync();
        _ = first.StandardOutput.ReadToEndAsync();
        var clock = Stopwatch.StartNew();
        while (!File.Exists(Path.Combine(run, RunFolder.ProgressFile)) && !first.HasExited && clock.Elapsed < TimeSpan.FromSeconds(60))
        {
            Thread.Sleep(20);
        }
        if (first.HasExited)
        {
            Assert.Fail("the first extract ended before a second could be started: " + await firstErr);
        }

        foreach (string flag in new[] { "--resume", "--overwrite" })
        {
            using Process second = ExtractCommandTests.StartChild([.. common, flag]);
            string err = await second.StandardError.ReadToEndAsync();
            await second.WaitForExitAsync();
            Assert.False(first.HasExited, $"the first extract ended before the {flag} one was refused, so the test proves nothing");
            Assert.Equal(2, second.ExitCode);
            Assert.Contains($"is being written by process {first.Id} on ", err, StringComparison.Ordinal);
            Assert.Single(err.TrimEnd().Split('\n'));
        }

        await first.WaitForExitAsync();
        Assert.True(first.ExitCode == 0, await firstErr);
        RunRecord record = RunRecord.Read(run);
        Assert.Equal(1500, record.Counts.Accepted);
        Assert.All(record.Files, f => Assert.Equal(1500, Npy.Read(Path.Combine(run, f.File)).Shape[0]));
        Assert.DoesNotContain(Directory.GetFiles(run), f => FolderLock.IsLockFile(Path.GetFileName(f)));
    }

    [Fact]
    public void Study_and_report_folders_are_locked_too()
    {
        using var temp = new TempFolder();
        string folder = temp.File("held");
        using (FolderLock.Acquire(folder))
        {
            string expected = $"is being written by process {Environment.ProcessId} on ";
            // Another open of the lock is refused even inside one process (the lock belongs to the open file).
            Assert.Contains(expected, Assert.Throws<RunFolderException>(() => FolderLock.Acquire(folder)).Message, StringComparison.Ordinal);
            Assert.Contains(expected, Assert.Throws<RunFolderException>(() => ReportFolder.Claim(folder, overwrite: true)).Message, StringComparison.Ordinal);
            File.WriteAllText(temp.File("s.json"), $$"""
                { "train": "t.jsonl", "test": "t.jsonl", "models": { "m": "{{Checkpoints.Folder(FeatureExtractorTests.Spec)}}" },
                  "prompts": { "p": "{text}" }, "features": ["cmean"] }
                """);
            File.WriteAllText(temp.File("t.jsonl"), "{\"id\": \"a\", \"text\": \"x\", \"label\": \"0\"}\n");
            Assert.Contains(expected, Assert.Throws<RunFolderException>(() => Assay.Evaluation.Study.Run(StudySpec.Load(temp.File("s.json")), folder)).Message, StringComparison.Ordinal);
        }
        // Released: the folder is empty again and can be taken.
        Assert.Empty(Directory.EnumerateFileSystemEntries(folder));
        using (ReportFolder.Claim(folder, overwrite: false))
        {
            Assert.True(File.Exists(Path.Combine(folder, FolderLock.WriterFile)));
        }
    }
}
