using System.Globalization;

namespace Assay.Output;

/// <summary>
/// A 2-D NumPy .npy file (<see cref="NpyFormat"/>) that grows by appending rows. Its header has a fixed size, so the
/// row count is rewritten in place at every commit and the file is always a valid array of the rows committed so far.
/// </summary>
internal sealed class NpyAppender : IDisposable
{
    private readonly FileStream _file;
    private readonly string _descr;

    private NpyAppender(string path, FileStream file, string descr, int width, int elementBytes)
    {
        Path = path;
        _file = file;
        _descr = descr;
        Width = width;
        RowBytes = width * elementBytes;
    }

    public string Path { get; }

    /// <summary>Values per row.</summary>
    public int Width { get; }

    /// <summary>Bytes per row.</summary>
    public int RowBytes { get; }

    /// <summary>Creates (or replaces) the file with zero rows; <paramref name="descr"/> is the NumPy dtype (&lt;f4, &lt;f2 or &lt;i4).</summary>
    public static NpyAppender Create(string path, string descr, int width)
    {
        var file = new FileStream(path, FileMode.Create, FileAccess.ReadWrite, FileShare.Read);
        var npy = new NpyAppender(path, file, descr, width, NpyFormat.ElementBytes(descr));
        npy.WriteHeader(0);
        return npy;
    }

    /// <summary>
    /// Opens a file an interrupted run left, keeping its first <paramref name="rows"/> rows and dropping anything
    /// after them (rows written after the last commit). The header is checked first: a .npy of this dtype and width
    /// whose header counts at least the committed rows, with their bytes there.
    /// </summary>
    /// <exception cref="RunFolderException">The file is missing, not such a .npy, or shorter than the committed rows.</exception>
    public static NpyAppender Reopen(string folder, string path, string descr, int width, long rows)
    {
        if (!File.Exists(path))
        {
            throw new RunFolderException(folder, $"{System.IO.Path.GetFileName(path)} is missing: the folder was changed since it was written; start over with --overwrite");
        }
        InputFile.Check(path);
        var file = new FileStream(path, FileMode.Open, FileAccess.ReadWrite, FileShare.Read);
        try
        {
            var npy = new NpyAppender(path, file, descr, width, NpyFormat.ElementBytes(descr));
            long length = NpyFormat.HeaderBytes + (rows * npy.RowBytes);
            byte[] header = new byte[Math.Min(file.Length, NpyFormat.HeaderBytes)];
            file.ReadExactly(header);
            string? problem = NpyFormat.ReadHeader(header) switch
            {
                null => "has no .npy header",
                var (d, _, w, _) when d != descr || w != width => string.Create(CultureInfo.InvariantCulture, $"has dtype {d} and width {w}; the run writes {descr} × {width}"),
                var (_, r, _, _) when r < rows => string.Create(CultureInfo.InvariantCulture, $"counts {r:N0} rows in its header; {rows:N0} were committed"),
                _ when file.Length < length => string.Create(CultureInfo.InvariantCulture, $"holds {file.Length:N0} bytes; the {rows:N0} committed rows need {length:N0}"),
                _ => null,
            };
            if (problem != null)
            {
                throw new RunFolderException(folder, $"{System.IO.Path.GetFileName(path)} {problem}: the folder was changed since it was written; start over with --overwrite");
            }
            file.SetLength(length);
            npy.WriteHeader(rows);
            file.Seek(0, SeekOrigin.End);
            return npy;
        }
        catch
        {
            file.Dispose();
            throw;
        }
    }

    public void Append(ReadOnlySpan<byte> rows) => _file.Write(rows);

    /// <summary>Makes the rows appended so far durable and records their count in the header.</summary>
    public void Commit(long rows)
    {
        _file.Flush(flushToDisk: true);
        WriteHeader(rows);
        _file.Flush(flushToDisk: true);
        _file.Seek(0, SeekOrigin.End);
    }

    public void Dispose() => _file.Dispose();

    private void WriteHeader(long rows)
    {
        _file.Seek(0, SeekOrigin.Begin);
        _file.Write(NpyFormat.Header(_descr, rows, Width));
    }
}
