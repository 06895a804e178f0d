using Assay.Features;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;
using FsCheck;
using FsCheck.Fluent;

namespace Assay.Tests.Hardening;

/// <summary>
/// Property (FsCheck 3): the files an unfinished run folder holds — progress.json, rows.csv, rejects.csv, each .npy
/// (its header or its data) — mutated at the byte level, then resumed. The only outcomes allowed: the run finishes
/// with every row, or a RunFolderException that names the folder. Nothing else (no NullReferenceException, no
/// ObjectDisposedException, no IOException taken for a full disk).
/// </summary>
public sealed class RunFolderPropertyTests : IDisposable
{
    /// <summary>Cases: 80 in the default run (each resumes an extraction); <c>ASSAY_PROPERTY_CASES</c> sets more.</summary>
    private static readonly int Cases = LoaderPropertyTests.CasesOr(80);

    private static readonly string[] Files = [RunFolder.ProgressFile, RunFolder.RowsFile, RunFolder.RejectsFile, "hidden.layer2.last.npy", "cmean.npy"];

    private static readonly LanguageModel Model = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));

    private readonly TempFolder _temp = new();
    private readonly string _input;
    private readonly string _interrupted;

    /// <summary>One unfinished run (8 rows committed) that every case copies.</summary>
    public RunFolderPropertyTests() => (_input, _interrupted) = DamagedRunFolderTests.Interrupted(_temp);

    public void Dispose() => _temp.Dispose();

    [Fact]
    public void A_mutated_run_folder_resumes_whole_or_is_refused_naming_the_folder()
    {
        int n = 0;
        Gen<(int Seed, int Kind, int File, bool Header)> cases =
            from seed in Gen.Choose(0, int.MaxValue) from kind in Gen.Choose(0, 3) from file in Gen.Choose(0, Files.Length - 1) from header in Gen.Elements(true, false)
            select (seed, kind, file, header);
        Prop.ForAll(cases.ToArbitrary(), c =>
        {
            string run = _temp.File($"case{n++}");
            Directory.CreateDirectory(run);
            foreach (string f in Directory.GetFiles(_interrupted))
            {
                File.Copy(f, Path.Combine(run, Path.GetFileName(f)));
            }
            string path = Path.Combine(run, Files[c.File]);
            byte[] bytes = File.ReadAllBytes(path);
            if (c.Header && c.File >= 3)
            {
                // A .npy's header alone: its first 128 bytes mutated, the data kept.
                byte[] header = LoaderPropertyTests.Mutate(bytes[..128], c.Seed, c.Kind);
                bytes = [.. header, .. bytes[128..]];
            }
            else
            {
                bytes = LoaderPropertyTests.Mutate(bytes, c.Seed, c.Kind);
            }
            File.WriteAllBytes(path, bytes);
            try
            {
                RunSummary s = ExtractionRun.Execute(Model, _input, run, DamagedRunFolderTests.Options() with { Resume = true });
                Assert.Equal(40, s.Accepted);
            }
            catch (RunFolderException e)
            {
                Assert.StartsWith(run + ": ", e.Message, StringComparison.Ordinal);
            }
        }).Check(FsCheck.Config.QuickThrowOnFailure.WithMaxTest(Cases));
    }
}
