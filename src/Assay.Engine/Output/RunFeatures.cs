using System.Buffers.Binary;

namespace Assay.Output;

/// <summary>One feature of a finished run folder, as float64 rows, with the rows' ids and labels from rows.csv.</summary>
public sealed record RunFeatures(double[] Values, int Rows, int Width, IReadOnlyList<string> Ids, IReadOnlyList<string> Labels)
{
    /// <summary>
    /// The file stem of a feature of a finished run, named by its stem (<c>hidden.layer4.last</c>) or as a feature
    /// list names it (<c>hidden:4</c>, <c>hidden</c>, <c>hidden:mean</c>, <c>cmean</c>, <c>topk:5</c> → its
    /// probabilities, <c>words-loglik</c> → its log-likelihoods).
    /// </summary>
    /// <exception cref="RunFolderException">No finished run, or it holds no such feature (the message lists what it holds).</exception>
    public static string Resolve(string runFolder, string feature) => Resolve(runFolder, RunRecord.Read(runFolder), feature);

    private static string Resolve(string runFolder, RunRecord record, string feature)
    {
        ArgumentNullException.ThrowIfNull(feature);
        HashSet<string> stems = [.. record.Files.Select(f => Path.GetFileNameWithoutExtension(f.File))];
        if (stems.Contains(feature))
        {
            return feature;
        }
        string? stem = null;
        try
        {
            IReadOnlyList<Features.FeatureRequest> requests = Features.FeatureSpec.Parse(feature, record.Shape.Layers, _ => []);
            if (requests.Count == 1)
            {
                Features.FeatureRequest r = requests[0];
                stem = r.Outputs(record.Shape)[r.PrimaryOutput].Name;
            }
        }
        catch (ArgumentException)
        {
            // Not a feature spelling either: refused below with what the run holds.
        }
        if (stem != null && stems.Contains(stem))
        {
            return stem;
        }
        string known = string.Join(", ", stems.Order(StringComparer.Ordinal));
        throw new RunFolderException(runFolder, $"has no feature \"{feature}\"{(stem != null ? $" ({stem}.npy)" : "")}; it has {known}");
    }

    /// <summary>Reads one feature (named as <see cref="Resolve(string, string)"/> takes it; float32, float16 or int32, as extract writes them) and rows.csv of a run folder.</summary>
    /// <exception cref="RunFolderException">The run is unfinished, the feature is missing, or the files disagree.</exception>
    public static RunFeatures Load(string runFolder, string feature)
    {
        ArgumentNullException.ThrowIfNull(runFolder);
        ArgumentNullException.ThrowIfNull(feature);
        if (!File.Exists(Path.Combine(runFolder, RunFolder.RecordFile)))
        {
            throw new RunFolderException(runFolder, $"holds no finished run ({RunFolder.RecordFile} is missing); finish it with assay extract --resume");
        }
        RunRecord record = RunRecord.Read(runFolder);
        string stem = Resolve(runFolder, record, feature);
        string path = Path.Combine(runFolder, stem + ".npy");
        byte[] bytes = InputFile.ReadAllBytes(path, Array.MaxLength);
        // The bytes are in memory anyway: a file changed since its run finished is caught by the record's SHA-256.
        foreach ((string file, long length, string sha) in record.Digests.Where(d => d.File == stem + ".npy"))
        {
            string actual = Convert.ToHexStringLower(System.Security.Cryptography.SHA256.HashData(bytes));
            if (bytes.LongLength != length || actual != sha)
            {
                throw new RunFolderException(runFolder, string.Create(System.Globalization.CultureInfo.InvariantCulture,
                    $"{file}: {bytes.LongLength:N0} bytes, SHA-256 {actual}; its run finished with {length:N0} bytes, SHA-256 {sha}: the file was changed since"));
            }
        }
        (string descr, long rowCount, int width, int offset) = NpyFormat.ReadHeader(bytes)
            ?? throw new RunFolderException(runFolder, $"{path}: not a 2-D .npy file of float32, float16 or int32");
        int rows = checked((int)rowCount);
        ReadOnlySpan<byte> data = bytes.AsSpan(offset);
        double[] values = new double[(long)rows * width];
        // The dtype is decided once; the loops convert without looking at it again.
        switch (descr)
        {
            case NpyFormat.Float32:
                for (int i = 0; i < values.Length; i++)
                {
                    values[i] = BinaryPrimitives.ReadSingleLittleEndian(data[(i * 4)..]);
                }
                break;
            case NpyFormat.Float16:
                for (int i = 0; i < values.Length; i++)
                {
                    values[i] = (double)BinaryPrimitives.ReadHalfLittleEndian(data[(i * 2)..]);
                }
                break;
            case NpyFormat.Int32:
                for (int i = 0; i < values.Length; i++)
                {
                    values[i] = BinaryPrimitives.ReadInt32LittleEndian(data[(i * 4)..]);
                }
                break;
            default:
                throw new RunFolderException(runFolder, $"{path}: dtype {descr} is not one extract writes");
        }

        (List<string> ids, List<string> labels) = RunTable.IdsAndLabels(runFolder);
        if (ids.Count != rows)
        {
            throw new RunFolderException(runFolder, $"{RunFolder.RowsFile} lists {ids.Count} rows; {path} holds {rows}");
        }
        return new RunFeatures(values, rows, width, ids, labels);
    }
}
