using System.Globalization;
using System.Text.Json.Nodes;
using CsvHelper;

namespace Assay.Cli.Commands;

/// <summary>The files of a report folder that the probe and zero-shot commands both write.</summary>
internal static class Predictions
{
    /// <summary>predictions.csv: id, label, predicted class, then p_CLASS for every class (round-trip precision).</summary>
    public static void Write(string path, IReadOnlyList<string> ids, IReadOnlyList<string> labels, IReadOnlyList<string> classes, double[] p)
    {
        int k = classes.Count;
        using var file = File.Create(path);
        using CsvWriter w = CsvWriter.Create(file, new CsvWriterOptions { NewLine = "\n" });
        w.WriteField("id");
        w.WriteField("label");
        w.WriteField("predicted");
        foreach (string c in classes)
        {
            w.WriteField("p_" + c);
        }
        w.EndRecord();
        for (int i = 0; i < ids.Count; i++)
        {
            ReadOnlySpan<double> row = p.AsSpan(i * k, k);
            w.WriteField(ids[i]);
            w.WriteField(labels[i]);
            w.WriteField(classes[Evaluation.LinearProbe.MostLikely(row)]);
            foreach (double v in row)
            {
                w.WriteField(v.ToString("R", CultureInfo.InvariantCulture));
            }
            w.EndRecord();
        }
    }

    /// <summary>A report's JSON, indented and unescaped.</summary>
    public static void WriteJson(string path, JsonObject json) => File.WriteAllText(path, json.ToJsonString(JsonOutput.Options) + "\n");
}
