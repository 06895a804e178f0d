using System.Buffers.Binary;

namespace Assay.Output;

/// <summary>One feature of a finished run folder, as float64 rows, with the rows' ids and labels from rows.csv.</summary>
public sealed record RunFeatures(double[] Values, int Rows, int Width, IReadOnlyList<string> Ids, IReadOnlyList<string> Labels)
{
    /// <summary>Reads <c>{feature}.npy</c> (float32, float16 or int32, as extract writes them) and rows.csv of a run folder.</summary>
    /// <exception cref="RunFolderException">The run is unfinished, the feature is missing, or the files disagree.</exception>
    public static RunFeatures Load(string runFolder, string feature)
    {
        ArgumentNullException.ThrowIfNull(runFolder);
        ArgumentNullException.ThrowIfNull(feature);
        if (!File.Exists(Path.Combine(runFolder, RunFolder.RecordFile)))
        {
            throw new RunFolderException(runFolder, $"holds no finished run ({RunFolder.RecordFile} is missing); finish it with assay extract --resume");
        }
        string path = Path.Combine(runFolder, feature + ".npy");
        if (!File.Exists(path))
        {
            string known = string.Join(", ", Directory.GetFiles(runFolder, "*.npy").Select(Path.GetFileNameWithoutExtension).Order(StringComparer.Ordinal));
            throw new RunFolderException(runFolder, $"has no feature \"{feature}\"; it has {known}");
        }
        byte[] bytes = File.ReadAllBytes(path);
        (string descr, long rowCount, int width, int offset) = NpyFormat.ReadHeader(bytes)
            ?? throw new RunFolderException(runFolder, $"{path}: not a 2-D .npy file of float32, float16 or int32");
        int rows = checked((int)rowCount);
        ReadOnlySpan<byte> data = bytes.AsSpan(offset);
        double[] values = new double[(long)rows * width];
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = descr switch
            {
                NpyFormat.Float32 => BinaryPrimitives.ReadSingleLittleEndian(data[(i * 4)..]),
                NpyFormat.Float16 => (double)BinaryPrimitives.ReadHalfLittleEndian(data[(i * 2)..]),
                NpyFormat.Int32 => BinaryPrimitives.ReadInt32LittleEndian(data[(i * 4)..]),
                _ => throw new RunFolderException(runFolder, $"{path}: dtype {descr} is not one extract writes"),
            };
        }

        (List<string> ids, List<string> labels) = RunTable.IdsAndLabels(runFolder);
        if (ids.Count != rows)
        {
            throw new RunFolderException(runFolder, $"{RunFolder.RowsFile} lists {ids.Count} rows; {path} holds {rows}");
        }
        return new RunFeatures(values, rows, width, ids, labels);
    }
}
