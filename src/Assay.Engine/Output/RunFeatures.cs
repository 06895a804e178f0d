using System.Buffers.Binary;
using System.Globalization;
using System.Text;
using System.Text.RegularExpressions;
using CsvHelper;

namespace Assay.Output;

/// <summary>One feature of a finished run folder, as float64 rows, with the rows' ids and labels from rows.csv.</summary>
public sealed partial record RunFeatures(double[] Values, int Rows, int Width, IReadOnlyList<string> Ids, IReadOnlyList<string> Labels)
{
    [GeneratedRegex(@"'descr':\s*'([<|][fi][248])'.*'shape':\s*\((\d+),\s*(\d+)\)")]
    private static partial Regex Header();

    /// <summary>Reads <c>{feature}.npy</c> (float32, float16 or int32, as extract writes them) and rows.csv of a run folder.</summary>
    /// <exception cref="RunFolderException">The run is unfinished, the feature is missing, or the files disagree.</exception>
    public static RunFeatures Load(string runFolder, string feature)
    {
        ArgumentNullException.ThrowIfNull(runFolder);
        ArgumentNullException.ThrowIfNull(feature);
        if (!File.Exists(Path.Combine(runFolder, ExtractionRun.RecordFile)))
        {
            throw new RunFolderException(runFolder, $"holds no finished run ({ExtractionRun.RecordFile} is missing); finish it with assay extract --resume");
        }
        string path = Path.Combine(runFolder, feature + ".npy");
        if (!File.Exists(path))
        {
            string known = string.Join(", ", Directory.GetFiles(runFolder, "*.npy").Select(Path.GetFileNameWithoutExtension).Order(StringComparer.Ordinal));
            throw new RunFolderException(runFolder, $"has no feature \"{feature}\"; it has {known}");
        }
        byte[] bytes = File.ReadAllBytes(path);
        int headerLength = BinaryPrimitives.ReadUInt16LittleEndian(bytes.AsSpan(8));
        Match m = Header().Match(Encoding.ASCII.GetString(bytes, 10, headerLength));
        if (!m.Success)
        {
            throw new RunFolderException(runFolder, $"{path}: not a 2-D .npy file of float32, float16 or int32");
        }
        int rows = int.Parse(m.Groups[2].Value, CultureInfo.InvariantCulture), width = int.Parse(m.Groups[3].Value, CultureInfo.InvariantCulture);
        ReadOnlySpan<byte> data = bytes.AsSpan(10 + headerLength);
        double[] values = new double[(long)rows * width];
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = m.Groups[1].Value[1..] switch
            {
                "f4" => BinaryPrimitives.ReadSingleLittleEndian(data[(i * 4)..]),
                "f2" => (double)BinaryPrimitives.ReadHalfLittleEndian(data[(i * 2)..]),
                "i4" => BinaryPrimitives.ReadInt32LittleEndian(data[(i * 4)..]),
                _ => throw new RunFolderException(runFolder, $"{path}: dtype {m.Groups[1].Value} is not one extract writes"),
            };
        }

        var ids = new List<string>(rows);
        var labels = new List<string>(rows);
        using (CsvReader csv = CsvReader.FromFile(Path.Combine(runFolder, ExtractionRun.RowsFile), new CsvReaderOptions { Separator = ',' }))
        {
            while (csv.Read())
            {
                ids.Add(csv.GetString("id"));
                labels.Add(csv.GetString("label"));
            }
        }
        if (ids.Count != rows)
        {
            throw new RunFolderException(runFolder, $"{ExtractionRun.RowsFile} lists {ids.Count} rows; {path} holds {rows}");
        }
        return new RunFeatures(values, rows, width, ids, labels);
    }
}
