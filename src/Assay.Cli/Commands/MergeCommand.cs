using System.CommandLine;
using System.Globalization;
using Assay.Output;

namespace Assay.Cli.Commands;

/// <summary><c>assay merge SHARD-FOLDER... --out &lt;run-folder&gt;</c>: one run folder from the folders of an extraction's shards.</summary>
internal static class MergeCommand
{
    public static Command Create()
    {
        var shards = new Argument<DirectoryInfo[]>("shards") { Description = "The run folders of all n shards (assay extract --shard k/n), in any order.", Arity = ArgumentArity.OneOrMore };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Run folder to write: new or empty.", Required = true };
        var command = new Command("merge", "Merge the shards of one extraction into the run folder a single run would have written, byte for byte.") { shards, output };
        command.SetAction(r => CommandRunner.Run(() =>
            Run([.. r.GetValue(shards)!.Select(d => d.FullName)], r.GetValue(output)!.FullName, Console.Out, Console.Error)));
        return command;
    }

    internal static int Run(IReadOnlyList<string> shards, string output, TextWriter o, TextWriter err)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        DateTime last = DateTime.UtcNow;
        var progress = new SynchronousProgress<long>(rows =>
        {
            if ((DateTime.UtcNow - last).TotalSeconds >= 10)
            {
                last = DateTime.UtcNow;
                err.WriteLine(string.Create(inv, $"assay: merging, {rows:N0} rows copied (over all feature files)"));
            }
        });
        MergeSummary s;
        try
        {
            s = RunMerge.Merge(shards, output, progress);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException && e is not FileNotFoundException and not DirectoryNotFoundException)
        {
            err.WriteLine($"assay: cannot write {output}: {e.Message}. Nothing was merged; free space or make the folder writable and run the merge again.");
            return ExtractCommand.WriteFailed;
        }
        o.WriteLine($"run folder  {output}");
        o.WriteLine(string.Create(inv, $"merged      {s.Shards} shards: {s.Rows:N0} rows, {s.Rejected:N0} rejected, {s.Files} feature files (provenance in {RunFolder.MergeFile})"));
        return 0;
    }
}
