namespace Assay.Evaluation;

/// <summary>
/// The folder a probe, a layer sweep or zero-shot scoring writes (probe.json, report.json, predictions.csv; a sweep's
/// layers.csv, layers.png and predictions.layerK.csv), under the rule of run
/// folders: a new or empty folder is used; one that holds an earlier report is replaced only when asked; one that
/// holds anything else is never written to.
/// </summary>
public static class ReportFolder
{
    /// <summary>A saved probe.</summary>
    public const string ProbeFile = "probe.json";

    /// <summary>The scores.</summary>
    public const string ReportFile = "report.json";

    /// <summary>One row per scored text: id, label, predicted label, probabilities.</summary>
    public const string PredictionsFile = "predictions.csv";

    /// <summary>A layer sweep's table: one row per layer.</summary>
    public const string LayersTable = "layers.csv";

    /// <summary>A layer sweep's plot: test accuracy against layer.</summary>
    public const string LayersPlot = "layers.png";

    private const string LayerPredictionsPrefix = "predictions.layer";

    private const string CsvSuffix = ".csv";

    /// <summary>A layer sweep's predictions of layer <paramref name="layer"/>, as <see cref="PredictionsFile"/>.</summary>
    public static string LayerPredictionsFile(int layer) => string.Create(System.Globalization.CultureInfo.InvariantCulture, $"{LayerPredictionsPrefix}{layer}{CsvSuffix}");

    private static bool IsReportFile(string name) => name is ProbeFile or ReportFile or PredictionsFile or LayersTable or LayersPlot
        || (name.StartsWith(LayerPredictionsPrefix, StringComparison.Ordinal) && name.EndsWith(CsvSuffix, StringComparison.Ordinal)
            && int.TryParse(name.AsSpan(LayerPredictionsPrefix.Length, name.Length - LayerPredictionsPrefix.Length - CsvSuffix.Length),
                System.Globalization.NumberStyles.None, System.Globalization.CultureInfo.InvariantCulture, out _));

    /// <summary>Checks, without touching it, that <see cref="Claim"/> would take <paramref name="folder"/>.</summary>
    /// <exception cref="Output.RunFolderException">As <see cref="Claim"/>.</exception>
    public static void CheckClaimable(string folder, bool overwrite)
    {
        ArgumentNullException.ThrowIfNull(folder);
        Output.FolderLock.RefuseFile(folder);
        if (Directory.Exists(folder))
        {
            Check(folder, overwrite);
        }
    }

    /// <summary>Takes <paramref name="folder"/> for a new report: locks it (dispose the lock once the report is written), then clears it.</summary>
    /// <exception cref="Output.RunFolderException">Another writer holds it, foreign files, or an earlier report without <paramref name="overwrite"/>.</exception>
    public static Output.FolderLock Claim(string folder, bool overwrite)
    {
        ArgumentNullException.ThrowIfNull(folder);
        Output.FolderLock folderLock = Output.FolderLock.Acquire(folder);
        try
        {
            foreach (string name in Check(folder, overwrite))
            {
                File.Delete(Path.Combine(folder, name));
            }
            return folderLock;
        }
        catch
        {
            folderLock.Dispose();
            throw;
        }
    }

    private static string[] Check(string folder, bool overwrite)
    {
        string[] names = [.. Directory.EnumerateFileSystemEntries(folder).Select(e => Path.GetFileName(e)!).Where(n => !Output.FolderLock.IsLockFile(n))];
        string[] foreign = [.. names.Where(n => !IsReportFile(n) && !n.EndsWith(Output.AtomicFile.TemporarySuffix, StringComparison.Ordinal))];
        if (foreign.Length > 0)
        {
            throw new Output.RunFolderException(folder, $"holds files that are not part of a report ({string.Join(", ", foreign.Take(3))}); give an empty or new folder");
        }
        if (names.Length > 0 && !overwrite)
        {
            throw new Output.RunFolderException(folder, "holds an earlier report, which is never overwritten unless asked; pass --overwrite to replace it");
        }
        return names;
    }
}
