using System.Text.Json.Nodes;
using Assay.Features;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Hardening;

/// <summary>
/// A run folder changed after it was written is refused with the file and what is wrong: on resume, every file of an
/// unfinished run is checked before anything is appended; a finished run's record keeps every output file's size and
/// SHA-256, which merge and the feature reader check, so one flipped byte is caught.
/// </summary>
public sealed class DamagedRunFolderTests
{
    private static readonly LanguageModel Model = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));

    internal static RunOptions Options(RunShard? shard = null) => new()
    {
        Extraction = new ExtractionOptions { Prompt = PromptTemplate.Parse("{text} It is a kind of"), Features = [new HiddenStateFeature(-1), new ConditionalMeanFeature()] },
        CommitRows = 8,
        Shard = shard,
    };

    /// <summary>An extraction of 40 texts stopped after its first commit (8 rows), while it computes the second group.</summary>
    internal static (string Input, string Run) Interrupted(TempFolder temp)
    {
        string input = ExtractionRunTests.WriteInput(temp, 40);
        string run = temp.File("run");
        using var cancel = new CancellationTokenSource();
        Assert.ThrowsAny<OperationCanceledException>(() =>
            ExtractionRun.Execute(Model, input, run, Options(), new ExtractionRunTests.SyncProgress(p => { if (p.Accepted > 8) { cancel.Cancel(); } }), cancel.Token));
        return (input, run);
    }

    public static TheoryData<string, string> Damage => new()
    {
        { "progress:{\"rows\": -5}", "progress.json has no \"settings\" object" },
        { "progress:accepted=-5", "progress.json \"accepted\" is -5, a negative count" },
        { "progress:accepted=\"8\"", "progress.json \"accepted\" is \"8\", not a count" },
        { "progress:accepted=999", "progress.json counts do not add up" },
        { "progress:not json", "progress.json is not JSON" },
        { "npy:truncate=100", "hidden.layer2.last.npy has no .npy header" },
        { "npy:truncate=200", "hidden.layer2.last.npy holds 200 bytes; the 8 committed rows need" },
        { "npy:delete", "hidden.layer2.last.npy is missing" },
        { "npy:width", "hidden.layer2.last.npy has dtype <f4 and width 5; the run writes <f4 × " },
        { "rows:truncate=10", "rows.csv holds 10 bytes, less than the" },
    };

    [Theory]
    [MemberData(nameof(Damage))]
    public void Resume_refuses_a_damaged_folder_naming_the_file_and_the_problem(string damage, string expected)
    {
        using var temp = new TempFolder();
        (string input, string run) = Interrupted(temp);
        string progress = Path.Combine(run, RunFolder.ProgressFile), npy = Path.Combine(run, "hidden.layer2.last.npy");
        switch (damage)
        {
            case "progress:{\"rows\": -5}": File.WriteAllText(progress, "{\"rows\": -5}"); break;
            case "progress:not json": File.WriteAllText(progress, "{\"rows\": "); break;
            case "npy:truncate=100": Truncate(npy, 100); break;
            case "npy:truncate=200": Truncate(npy, 200); break;
            case "npy:delete": File.Delete(npy); break;
            case "npy:width":
                byte[] bytes = File.ReadAllBytes(npy);
                string header = System.Text.Encoding.ASCII.GetString(bytes, 0, 128);
                int at = header.IndexOf(", 48)", StringComparison.Ordinal);
                Assert.True(at > 0, header);
                System.Text.Encoding.ASCII.GetBytes(", 5) ").CopyTo(bytes, at);
                File.WriteAllBytes(npy, bytes);
                break;
            case "rows:truncate=10": Truncate(Path.Combine(run, RunFolder.RowsFile), 10); break;
            default:
                var o = (JsonObject)JsonNode.Parse(File.ReadAllText(progress))!;
                o["accepted"] = JsonNode.Parse(damage["progress:accepted=".Length..]);
                File.WriteAllText(progress, o.ToJsonString());
                break;
        }
        var e = Assert.Throws<RunFolderException>(() => ExtractionRun.Execute(Model, input, run, Options() with { Resume = true }));
        Assert.StartsWith(run + ": ", e.Message, StringComparison.Ordinal);
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
        Assert.EndsWith("start over with --overwrite", e.Message, StringComparison.Ordinal);
        // --overwrite still starts over.
        Assert.Equal(40, ExtractionRun.Execute(Model, input, run, Options() with { Overwrite = true }).Accepted);
    }

    [Fact]
    public void A_byte_flipped_in_a_finished_shard_or_run_is_caught_by_its_record()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 30);
        string[] shards = [temp.File("s1"), temp.File("s2")];
        for (int k = 0; k < 2; k++)
        {
            ExtractionRun.Execute(Model, input, shards[k], Options(new RunShard(k + 1, 2)));
        }
        RunRecord record = RunRecord.Read(shards[1]);
        Assert.Null(record.FirstDamagedFile(shards[1]));
        string cmean = Path.Combine(shards[1], "cmean.npy");
        Flip(cmean, 500);
        Assert.StartsWith("cmean.npy: SHA-256 ", record.FirstDamagedFile(shards[1]), StringComparison.Ordinal);
        var e = Assert.Throws<RunFolderException>(() => RunMerge.Merge(shards, temp.File("merged")));
        Assert.Contains("cmean.npy: SHA-256 ", e.Message, StringComparison.Ordinal);
        Assert.False(Directory.Exists(temp.File("merged")));

        Flip(cmean, 500);   // flipped back: the merge goes through, and the merged record keeps its own digests
        RunRecord merged = RunRecord.Read(Path.GetDirectoryName(cmean)!);
        Assert.Null(merged.FirstDamagedFile(shards[1]));
        RunMerge.Merge(shards, temp.File("merged"));
        Assert.Null(RunRecord.Read(temp.File("merged")).FirstDamagedFile(temp.File("merged")));

        // The feature reader (probe, study) checks the file it reads.
        Flip(Path.Combine(temp.File("merged"), "cmean.npy"), 300);
        Assert.Contains("the file was changed since", Assert.Throws<RunFolderException>(() => RunFeatures.Load(temp.File("merged"), "cmean")).Message, StringComparison.Ordinal);
    }

    private static void Truncate(string path, long length)
    {
        using var f = new FileStream(path, FileMode.Open);
        f.SetLength(length);
    }

    private static void Flip(string path, long offset)
    {
        using var f = new FileStream(path, FileMode.Open);
        f.Position = offset;
        int b = f.ReadByte();
        f.Position = offset;
        f.WriteByte((byte)(b ^ 0x01));
    }
}
