using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Features;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Support;

namespace Assay.Tests.Output;

/// <summary>
/// Sharded extraction and merge. The reference is a single-process run of the same extraction (whose outputs are
/// checked against numpy in ExtractionRunTests): merged folders must equal it byte for byte, whatever the shards'
/// commit sizes, token budgets and interruptions.
/// </summary>
public sealed class ShardMergeTests
{
    private static readonly IReadOnlyList<FeatureRequest> Kinds =
        [new HiddenStateFeature(-1), new TopTokensFeature(3), new ConditionalMeanFeature(), new WordListFeature(["lamp", "rope"])];

    private static LanguageModel Model() => LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));

    private static RunOptions Options(RunShard? shard = null, int commitRows = 16) => new()
    {
        Extraction = new ExtractionOptions { Prompt = PromptTemplate.Parse("{text} It is a kind of"), Features = Kinds },
        CommitRows = commitRows,
        Shard = shard,
    };

    private static string[] RunShards(LanguageModel m, string input, TempFolder temp, int n, string prefix, FeaturePrecision precision = FeaturePrecision.Binary32)
    {
        var folders = new string[n];
        for (int k = 1; k <= n; k++)
        {
            folders[k - 1] = temp.File($"{prefix}{k}");
            // Each shard with its own commit size and token budget: neither may change a byte.
            RunOptions o = Options(new RunShard(k, n), commitRows: 3 + (5 * k)) with { Precision = precision };
            ExtractionRun.Execute(m, input, folders[k - 1], o with { Extraction = o.Extraction with { TokenBudget = 64 * k } });
        }
        return folders;
    }

    [Fact]
    public void A_merge_into_a_folder_another_writer_holds_is_refused_naming_it()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 6);
        string[] shards = RunShards(Model(), input, temp, 2, "s");
        string merged = temp.File("merged");
        using (FolderLock.Acquire(merged))
        {
            var e = Assert.Throws<RunFolderException>(() => RunMerge.Merge(shards, merged));
            Assert.Contains($"is being written by process {Environment.ProcessId} on ", e.Message, StringComparison.Ordinal);
            Assert.False(Directory.Exists(merged + ".merging"));
        }
        RunMerge.Merge(shards, merged);
        Assert.Equal(6, RunRecord.Read(merged).Counts.Accepted);
        Assert.DoesNotContain(Directory.GetFiles(merged), f => FolderLock.IsLockFile(Path.GetFileName(f)));
    }

    private static void AssertSameBytes(string expectedFolder, string actualFolder)
    {
        Dictionary<string, byte[]> expected = ExtractionRunTests.Bytes(expectedFolder), actual = ExtractionRunTests.Bytes(actualFolder);
        actual.Remove(RunFolder.MergeFile);
        Assert.Equal(expected.Keys.Order(), actual.Keys.Order());
        Assert.All(expected, f => Assert.True(f.Value.AsSpan().SequenceEqual(actual[f.Key]), $"{f.Key} differs"));
    }

    [Theory]
    [InlineData(2, 40)]
    [InlineData(3, 41)]
    [InlineData(5, 3)]    // more shards than rows: shards 4 and 5 hold none
    public void Merged_shards_equal_a_single_run_byte_for_byte(int n, int texts)
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, texts);
        LanguageModel m = Model();
        RunSummary single = ExtractionRun.Execute(m, input, temp.File("single"), Options());
        string[] shards = RunShards(m, input, temp, n, "shard");

        // Every accepted row is in exactly one shard, the one its input index says.
        var seen = new List<long>();
        for (int k = 1; k <= n; k++)
        {
            long[] rows = File.ReadAllLines(Path.Combine(shards[k - 1], RunFolder.RowsFile)).Skip(1).Select(l => long.Parse(l.Split(',')[0], System.Globalization.CultureInfo.InvariantCulture)).ToArray();
            Assert.All(rows, r => Assert.Equal(k - 1, r % n));
            seen.AddRange(rows);
        }
        Assert.Equal(Enumerable.Range(0, texts).Select(i => (long)i), seen.Order());

        MergeSummary s = RunMerge.Merge(shards.Reverse().ToArray(), temp.File("merged"));
        Assert.Equal((n, (long)texts, single.Rejected), (s.Shards, s.Rows, s.Rejected));
        Assert.True(single.Rejected > 0);
        AssertSameBytes(temp.File("single"), temp.File("merged"));

        using JsonDocument provenance = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(temp.File("merged"), RunFolder.MergeFile)));
        Assert.Equal(Enumerable.Range(1, n).Select(k => $"{k}/{n}"),
            provenance.RootElement.GetProperty("shards").EnumerateArray().Select(e => e.GetProperty("shard").GetString()));
    }

    [Fact]
    public void Float16_shards_merge_to_the_float16_single_run()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 23);
        LanguageModel m = Model();
        ExtractionRun.Execute(m, input, temp.File("single"), Options() with { Precision = FeaturePrecision.Binary16 });
        RunMerge.Merge(RunShards(m, input, temp, 4, "shard", FeaturePrecision.Binary16), temp.File("merged"));
        AssertSameBytes(temp.File("single"), temp.File("merged"));
    }

    [Fact]
    public void A_shard_reruns_and_resumes_to_the_same_bytes_and_refuses_another_shard()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 60);
        LanguageModel m = Model();
        var shard = new RunShard(2, 3);
        ExtractionRun.Execute(m, input, temp.File("once"), Options(shard, commitRows: 4));
        ExtractionRun.Execute(m, input, temp.File("again"), Options(shard, commitRows: 4));
        AssertSameBytes(temp.File("once"), temp.File("again"));

        string run = temp.File("interrupted");
        foreach (bool resume in new[] { false, true })
        {
            using var cancel = new CancellationTokenSource();
            int reports = 0;
            Assert.ThrowsAny<OperationCanceledException>(() => ExtractionRun.Execute(m, input, run, Options(shard, commitRows: 4) with { Resume = resume },
                new ExtractionRunTests.SyncProgress(_ =>
                {
                    if (++reports == 3)
                    {
                        cancel.Cancel();
                    }
                }), cancel.Token));
        }
        RunFolderException other = Assert.Throws<RunFolderException>(() =>
            ExtractionRun.Execute(m, input, run, Options(new RunShard(3, 3), commitRows: 4) with { Resume = true }));
        Assert.Contains("different shard", other.Message, StringComparison.Ordinal);
        Assert.True(ExtractionRun.Execute(m, input, run, Options(shard, commitRows: 4) with { Resume = true }).ResumedAt > 0);
        AssertSameBytes(temp.File("once"), run);
    }

    [Fact]
    public void Shards_that_do_not_belong_together_are_refused_and_nothing_is_merged()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 20);
        LanguageModel m = Model();
        string[] s = RunShards(m, input, temp, 3, "shard");
        ExtractionRun.Execute(m, input, temp.File("single"), Options());
        ExtractionRun.Execute(m, input, temp.File("two"), Options(new RunShard(2, 4)));
        ExtractionRun.Execute(m, input, temp.File("prompt"), Options(new RunShard(2, 3)) with
        {
            Extraction = Options().Extraction with { Prompt = PromptTemplate.Parse("{text}!") },
        });
        string other = temp.File("other-input.jsonl");
        File.WriteAllLines(other, File.ReadAllLines(input).Take(15));
        ExtractionRun.Execute(m, other, temp.File("input"), Options(new RunShard(2, 3)));
        string unfinished = temp.File("unfinished");
        using (var cancel = new CancellationTokenSource())
        {
            Assert.ThrowsAny<OperationCanceledException>(() => ExtractionRun.Execute(m, input, unfinished, Options(new RunShard(2, 3), commitRows: 2),
                new ExtractionRunTests.SyncProgress(_ => cancel.Cancel()), cancel.Token));
        }
        string damaged = temp.File("damaged");
        Directory.CreateDirectory(damaged);
        foreach (string f in Directory.GetFiles(s[1]))
        {
            File.Copy(f, Path.Combine(damaged, Path.GetFileName(f)));
        }
        using (FileStream cut = File.OpenWrite(Path.Combine(damaged, "cmean.npy")))
        {
            cut.SetLength(cut.Length - 4);
        }

        (string[] Folders, string Names)[] cases =
        [
            ([s[0], s[2]], "shard 2/3 missing"),
            ([s[0], s[1], s[1], s[2]], "holds shard 2/3, and so does"),
            ([s[0], temp.File("single"), s[2]], "holds an unsharded run"),
            ([s[0], temp.File("two"), s[2]], "is one of 3 shards"),
            ([s[0], temp.File("prompt"), s[2]], "different prompt"),
            ([s[0], temp.File("input"), s[2]], "different input"),
            ([s[0], unfinished, s[2]], "holds an unfinished shard"),
            ([s[0], damaged, s[2]], "cmean.npy: "),
            ([s[0], temp.File("no-such-folder"), s[2]], "no such shard folder"),
        ];
        foreach ((string[] folders, string expected) in cases)
        {
            RunFolderException e = Assert.Throws<RunFolderException>(() => RunMerge.Merge(folders, temp.File("merged")));
            Assert.Contains(expected, e.Message, StringComparison.Ordinal);
            Assert.False(Directory.Exists(temp.File("merged")), $"{expected}: a folder was written");
            Assert.False(Directory.Exists(temp.File("merged") + ".merging"));
        }

        Directory.CreateDirectory(temp.File("taken"));
        File.WriteAllText(temp.File("taken/notes.txt"), "mine");
        Assert.Contains("already holds files", Assert.Throws<RunFolderException>(() => RunMerge.Merge(s, temp.File("taken"))).Message, StringComparison.Ordinal);
        Assert.Equal("mine", File.ReadAllText(temp.File("taken/notes.txt")));
    }

    [Fact]
    public void Shard_comes_from_the_option_or_the_Slurm_array_environment()
    {
        Func<string, string?> none = _ => null;
        Assert.Equal(new RunShard(2, 4), ExtractCommand.Shard("2/4", none, TextWriter.Null));
        Assert.Null(ExtractCommand.Shard("1/1", none, TextWriter.Null));
        Assert.Null(ExtractCommand.Shard(null, none, TextWriter.Null));
        foreach (string bad in new[] { "0/4", "5/4", "2", "2/0", "a/b", "-1/3", "2/4/8", " 2/4" })
        {
            Assert.Throws<ArgumentException>(() => ExtractCommand.Shard(bad, none, TextWriter.Null));
        }

        static Func<string, string?> Slurm(string id, string min, string count) => name => name switch
        {
            "SLURM_ARRAY_TASK_ID" => id,
            "SLURM_ARRAY_TASK_MIN" => min,
            "SLURM_ARRAY_TASK_COUNT" => count,
            _ => null,
        };
        var err = new StringWriter();
        Assert.Equal(new RunShard(1, 4), ExtractCommand.Shard(null, Slurm("0", "0", "4"), err));
        Assert.Contains("shard 1/4 from the Slurm job array", err.ToString(), StringComparison.Ordinal);
        Assert.Equal(new RunShard(4, 4), ExtractCommand.Shard(null, Slurm("4", "1", "4"), TextWriter.Null));
        Assert.Equal(new RunShard(3, 3), ExtractCommand.Shard(null, Slurm("12", "10", "3"), TextWriter.Null));
        Assert.Null(ExtractCommand.Shard("1/1", Slurm("2", "0", "4"), TextWriter.Null));    // the option wins
        Assert.Equal(new RunShard(3, 5), ExtractCommand.Shard("3/5", Slurm("2", "0", "4"), TextWriter.Null));
        Assert.Contains("as a range", Assert.Throws<ArgumentException>(() => ExtractCommand.Shard(null, Slurm("5", "1", "3"), TextWriter.Null)).Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentException>(() => ExtractCommand.Shard(null, Slurm("x", "0", "4"), TextWriter.Null));
    }

    [Fact]
    public void RunShard_assigns_rows_by_input_index_mod_n()
    {
        var s = new RunShard(3, 4);
        Assert.Equal([2L, 6L, 10L], Enumerable.Range(0, 12).Select(i => (long)i).Where(s.Holds));
        for (long rows = 0; rows < 30; rows++)
        {
            Assert.Equal(Enumerable.Range(0, (int)rows).Count(i => s.Holds(i)), s.RowsOf(rows));
        }
        Assert.Throws<ArgumentOutOfRangeException>(() => new RunShard(0, 4));
        Assert.Throws<ArgumentOutOfRangeException>(() => new RunShard(5, 4));
        Assert.Throws<ArgumentOutOfRangeException>(() => new RunShard(1, 1));
    }
}
