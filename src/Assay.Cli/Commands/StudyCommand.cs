using System.CommandLine;
using Assay.Evaluation;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay study &lt;study-file&gt; --out DIR</c>: runs a grid of models × prompts × feature kinds on a labelled task
/// and writes results.md, results.csv and PNG plots beside the runs.
/// </summary>
internal static class StudyCommand
{
    public static Command Create()
    {
        var file = new Argument<FileInfo>("study") { Description = "Study file (JSON): task files, models, prompts, feature kinds, verbalizer, probe settings." };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Study folder (created if missing; rerun the same command to continue an interrupted study).", Required = true };
        var overwrite = new Option<bool>("--overwrite") { Description = "Start over in a folder that holds a study made from another study file." };
        var command = new Command("study", "Run a grid of models × prompts × feature kinds on a labelled task: probe accuracy, log loss, zero-shot, the models' cross-entropy and the loss-against-cross-entropy fit; writes Markdown, CSV and PNG plots.")
        {
            file, output, overwrite,
        };
        command.SetAction(r => CommandRunner.Run(() => Run(r.GetValue(file)!.FullName, r.GetValue(output)!.FullName, r.GetValue(overwrite), Console.Out, Console.Error)));
        return command;
    }

    internal static int Run(string studyFile, string output, bool overwrite, TextWriter o, TextWriter err)
    {
        StudySpec spec = StudySpec.Load(studyFile);
        var clock = System.Diagnostics.Stopwatch.StartNew();
        StudyProgressPrinter printer = StudyProgressPrinter.ForConsole(err);
        StudyResult result = Study.Run(spec, output, overwrite, new SynchronousProgress(err, clock, printer), printer);
        string markdown = StudyReport.Markdown(result);
        StudyReport.Write(result, output, markdown);
        o.Write(markdown);
        o.WriteLine();
        o.WriteLine($"wrote {Path.Combine(output, StudyFolder.MarkdownFile)}, {StudyFolder.CsvFile}, {StudyFolder.HtmlFile} and the plots in {output}");
        return 0;
    }

    /// <summary>
    /// Writes each log line at once (Progress&lt;T&gt; would post them to the thread pool, out of order), in place of the
    /// step's progress line.
    /// </summary>
    private sealed class SynchronousProgress(TextWriter err, System.Diagnostics.Stopwatch clock, StudyProgressPrinter printer) : IProgress<string>
    {
        public void Report(string value)
        {
            printer.Clear();
            err.WriteLine($"[{clock.Elapsed:hh\\:mm\\:ss}] {value}");
        }
    }
}
