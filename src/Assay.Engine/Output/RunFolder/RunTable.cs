using CsvHelper;

namespace Assay.Output;

/// <summary>
/// A CSV table of a run folder (<see cref="Rows"/>, <see cref="Rejects"/>): a header line of plain column names,
/// then records appended in blocks and committed by length, so a resume cuts it back to its last commit.
/// </summary>
internal sealed class RunTable
{
    /// <summary>rows.csv: one record per accepted row, in row order.</summary>
    public static readonly RunTable Rows = new(RunFolder.RowsFile, ["row", "line", "id", "label", "tokens", "truncated_tokens"]);

    /// <summary>rejects.csv: one record per rejected input record, in input order.</summary>
    public static readonly RunTable Rejects = new(RunFolder.RejectsFile, ["line", "reason"]);

    private static readonly CsvWriterOptions WriterOptions = new() { NewLine = "\n" };

    private RunTable(string fileName, string[] columns)
    {
        FileName = fileName;
        Columns = columns;
    }

    public string FileName { get; }

    public IReadOnlyList<string> Columns { get; }

    /// <summary>Creates the table with its header line (<paramref name="fresh"/>), or reopens it cut back to <paramref name="committedBytes"/>.</summary>
    /// <exception cref="RunFolderException">The file is missing or shorter than its last commit: the folder was changed since.</exception>
    public FileStream Open(string folder, bool fresh, long committedBytes)
    {
        string path = Path.Combine(folder, FileName);
        if (fresh)
        {
            var created = new FileStream(path, FileMode.Create, FileAccess.ReadWrite, FileShare.Read);
            Append(created, w =>
            {
                foreach (string h in Columns)
                {
                    w.WriteField(h);
                }
                w.EndRecord();
            });
            return created;
        }
        if (!File.Exists(path))
        {
            throw new RunFolderException(folder, $"{FileName} is missing: the folder was changed since it was written; start over with --overwrite");
        }
        InputFile.Check(path);
        var file = new FileStream(path, FileMode.Open, FileAccess.ReadWrite, FileShare.Read);
        if (file.Length < committedBytes)
        {
            long length = file.Length;
            file.Dispose();
            throw new RunFolderException(folder, string.Create(System.Globalization.CultureInfo.InvariantCulture,
                $"{FileName} holds {length:N0} bytes, less than the {committedBytes:N0} of its last commit: the folder was changed since it was written; start over with --overwrite"));
        }
        file.SetLength(committedBytes);
        file.Seek(0, SeekOrigin.End);
        return file;
    }

    /// <summary>Appends the records <paramref name="write"/> writes, as one block.</summary>
    public static void Append(FileStream file, Action<CsvWriter> write)
    {
        using var buffer = new MemoryStream();
        using (CsvWriter w = CsvWriter.Create(buffer, WriterOptions, leaveOpen: true))
        {
            write(w);
        }
        buffer.WriteTo(file);
    }

    /// <summary>The id and label columns of a finished run's rows.csv.</summary>
    public static (List<string> Ids, List<string> Labels) IdsAndLabels(string folder)
    {
        var ids = new List<string>();
        var labels = new List<string>();
        using CsvReader csv = CsvReader.FromFile(Path.Combine(folder, RunFolder.RowsFile), new CsvReaderOptions { Separator = ',' });
        while (csv.Read())
        {
            ids.Add(csv.GetString("id"));
            labels.Add(csv.GetString("label"));
        }
        return (ids, labels);
    }
}
