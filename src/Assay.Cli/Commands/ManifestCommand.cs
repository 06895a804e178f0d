using System.CommandLine;
using Assay.Model;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay manifest pin &lt;entry.json&gt;</c> records a trusted folder's files and hashes in a weights-manifest entry;
/// <c>assay manifest verify &lt;entry.json&gt;</c> checks a copy against it (exit 1 and one line per differing file).
/// </summary>
internal static class ManifestCommand
{
    public const int Mismatch = 1;

    public static Command Create()
    {
        var pinEntry = new Argument<FileInfo>("entry") { Description = "Manifest entry to create or complete, e.g. weights-manifest/gpt2-124m.json." };
        var pinModel = ModelOption.Create();
        var licence = new Option<string>("--licence") { Description = "Licence of the weights, recorded in the entry." };
        var provenance = new Option<string>("--provenance") { Description = "Where the weights come from, recorded in the entry." };
        var repin = new Option<bool>("--repin") { Description = "Replace the hashes of an entry already pinned." };
        var pin = new Command("pin", "Record every file of a trusted model folder (size, SHA-256) in a manifest entry, after checking it against the entry's architecture.")
        {
            pinEntry, pinModel, licence, provenance, repin,
        };
        pin.SetAction(r => CommandRunner.Run(() =>
            Pin(r.GetValue(pinModel)!.FullName, r.GetValue(pinEntry)!.FullName, r.GetValue(licence), r.GetValue(provenance), r.GetValue(repin), Console.Out)));

        var verifyEntry = new Argument<FileInfo>("entry") { Description = "Pinned manifest entry." };
        var verifyModel = ModelOption.Create();
        var verify = new Command("verify", "Check a model folder against a pinned manifest entry: every file, its size and SHA-256.") { verifyEntry, verifyModel };
        verify.SetAction(r => CommandRunner.Run(() =>
            Verify(r.GetValue(verifyModel)!.FullName, r.GetValue(verifyEntry)!.FullName, Console.Out, Console.Error)));

        return new Command("manifest", "Pin model folders into the weights manifest and verify copies against it.") { pin, verify };
    }

    internal static int Pin(string folder, string entry, string? licence, string? provenance, bool repin, TextWriter o)
    {
        WeightsManifest.Pin(folder, entry, licence, provenance, repin);
        o.WriteLine($"pinned {folder} into {entry}");
        return 0;
    }

    internal static int Verify(string folder, string entry, TextWriter o, TextWriter err)
    {
        IReadOnlyList<string> problems = WeightsManifest.Verify(folder, entry);
        if (problems.Count == 0)
        {
            o.WriteLine($"OK: {folder} matches {entry}");
            return 0;
        }
        foreach (string p in problems)
        {
            err.WriteLine($"assay: {p}");
        }
        err.WriteLine($"assay: {folder} does not match {entry} ({problems.Count} difference{(problems.Count == 1 ? "" : "s")})");
        return Mismatch;
    }
}
