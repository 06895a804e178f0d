using System.Globalization;
using CsvHelper;

namespace Assay.Evaluation;

/// <summary>
/// A report folder's predictions.csv, as <c>assay probe</c> and <c>assay zero-shot</c> write it: id, label, predicted
/// class, then p_CLASS for every class (round-trip precision).
/// </summary>
/// <param name="Ids">Row ids, in file order.</param>
/// <param name="Labels">True labels.</param>
/// <param name="Classes">The class names, in column order.</param>
/// <param name="Probabilities">rows × classes, row-major.</param>
public sealed record PredictionTable(IReadOnlyList<string> Ids, IReadOnlyList<string> Labels, IReadOnlyList<string> Classes, double[] Probabilities)
{
    private const string ClassPrefix = "p_";

    /// <summary>Writes the table to <paramref name="path"/>.</summary>
    public static void Write(string path, IReadOnlyList<string> ids, IReadOnlyList<string> labels, IReadOnlyList<string> classes, double[] p)
    {
        ArgumentNullException.ThrowIfNull(path);
        ArgumentNullException.ThrowIfNull(ids);
        ArgumentNullException.ThrowIfNull(labels);
        ArgumentNullException.ThrowIfNull(classes);
        ArgumentNullException.ThrowIfNull(p);
        int k = classes.Count;
        using var file = File.Create(path);
        using CsvWriter w = CsvWriter.Create(file, new CsvWriterOptions { NewLine = "\n" });
        w.WriteField("id");
        w.WriteField("label");
        w.WriteField("predicted");
        foreach (string c in classes)
        {
            w.WriteField(ClassPrefix + c);
        }
        w.EndRecord();
        for (int i = 0; i < ids.Count; i++)
        {
            ReadOnlySpan<double> row = p.AsSpan(i * k, k);
            w.WriteField(ids[i]);
            w.WriteField(labels[i]);
            w.WriteField(classes[LinearProbe.MostLikely(row)]);
            foreach (double v in row)
            {
                w.WriteField(v.ToString("R", CultureInfo.InvariantCulture));
            }
            w.EndRecord();
        }
    }

    /// <summary>Reads a predictions.csv.</summary>
    /// <exception cref="InputFileException">Not such a table (the message names the file and line).</exception>
    public static PredictionTable Read(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        if (!File.Exists(path))
        {
            throw new FileNotFoundException($"{path}: no such predictions file", path);
        }
        var ids = new List<string>();
        var labels = new List<string>();
        var p = new List<double>();
        using CsvReader csv = CsvReader.FromFile(path, new CsvReaderOptions { Separator = ',', HasHeader = true, TrackLineNumbers = true });
        try
        {
            csv.ReadHeader();
        }
        catch (CsvFormatException e)
        {
            throw new InputFileException(path, $"line {e.LineNumber}: {e.Message}");
        }
        IReadOnlyList<string> header = csv.Headers;
        if (header.Count < 4 || header[0] != "id" || header[1] != "label" || header[2] != "predicted" || header.Skip(3).Any(h => !h.StartsWith(ClassPrefix, StringComparison.Ordinal)))
        {
            throw new InputFileException(path, "line 1: expected the header id,label,predicted,p_CLASS… that assay probe and assay zero-shot write");
        }
        string[] classes = [.. header.Skip(3).Select(h => h[ClassPrefix.Length..])];
        while (true)
        {
            try
            {
                if (!csv.Read())
                {
                    break;
                }
            }
            catch (CsvFormatException e)
            {
                throw new InputFileException(path, $"line {e.LineNumber}: {e.Message}");
            }
            if (csv.FieldCount != header.Count)
            {
                throw new InputFileException(path, $"line {csv.LineNumber}: {csv.FieldCount} fields; the header has {header.Count}");
            }
            ids.Add(csv.GetString(0));
            labels.Add(csv.GetString(1));
            for (int j = 0; j < classes.Length; j++)
            {
                string field = csv.GetString(3 + j);
                p.Add(double.TryParse(field, NumberStyles.Float, CultureInfo.InvariantCulture, out double v) && v >= 0 && v <= 1
                    ? v : throw new InputFileException(path, $"line {csv.LineNumber}: p_{classes[j]} \"{field}\" is not a probability"));
            }
        }
        if (ids.Count == 0)
        {
            throw new InputFileException(path, "holds no rows");
        }
        return new PredictionTable(ids, labels, classes, [.. p]);
    }
}
