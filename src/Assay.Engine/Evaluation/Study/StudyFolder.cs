namespace Assay.Evaluation;

/// <summary>
/// The layout of a study folder, its one owner: the resolved study file, the study's cached parts (the subsampled
/// task, the extraction runs, the scored cells), and the report files a report writer puts beside them (tables and
/// one accuracy plot, one loss-against-cross-entropy plot and, with a layer sweep, one accuracy-by-layer plot per
/// prompt). Anything else in the folder is foreign.
/// </summary>
public static class StudyFolder
{
    /// <summary>The resolved study file as stored in the folder.</summary>
    public const string SpecFile = "study.json";

    /// <summary>The subsampled task files.</summary>
    public const string DataFolder = "data";

    /// <summary>One extraction run per model, prompt and split: runs/MODEL/PROMPT/train|test.</summary>
    public const string RunsFolder = "runs";

    /// <summary>Each cell's score and each model's cross-entropy.</summary>
    public const string CellsFolder = "cells";

    /// <summary>The report's Markdown tables.</summary>
    public const string MarkdownFile = "results.md";

    /// <summary>The report's table of every cell.</summary>
    public const string CsvFile = "results.csv";

    /// <summary>The report as one self-contained page: tables, plots inline, the study file, the models' file hashes.</summary>
    public const string HtmlFile = "report.html";

    /// <summary>The engine (version and kernel path) that computed the folder's parts, as the last run found it.</summary>
    public const string EngineFile = "engine.json";

    private const string AccuracyPrefix = "accuracy.";

    private const string LossPrefix = "loss-vs-cross-entropy.";

    private const string LayersPrefix = "layers.";

    private const string PlotSuffix = ".png";

    /// <summary>The accuracy plot of one prompt.</summary>
    public static string AccuracyPlot(string prompt) => AccuracyPrefix + prompt + PlotSuffix;

    /// <summary>The loss-against-cross-entropy plot of one prompt.</summary>
    public static string LossPlot(string prompt) => LossPrefix + prompt + PlotSuffix;

    /// <summary>The accuracy-by-layer plot of one prompt (a study with a layer sweep).</summary>
    public static string LayersPlot(string prompt) => LayersPrefix + prompt + PlotSuffix;

    /// <summary>Whether an entry of this name belongs in a study folder (a part of the study or a report file).</summary>
    internal static bool Owns(string name) =>
        Output.FolderLock.IsLockFile(name) || name is SpecFile or EngineFile or DataFolder or RunsFolder or CellsFolder or MarkdownFile or CsvFile or HtmlFile
        || (name.EndsWith(PlotSuffix, StringComparison.Ordinal)
            && (name.StartsWith(AccuracyPrefix, StringComparison.Ordinal) || name.StartsWith(LossPrefix, StringComparison.Ordinal)
                || name.StartsWith(LayersPrefix, StringComparison.Ordinal)));
}
