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
    /// after them (rows written after the last commit).
    /// </summary>
    /// <exception cref="IOException">The file is shorter than the committed rows: it was changed since.</exception>
    public static NpyAppender Reopen(string path, string descr, int width, long rows)
    {
        InputFile.Check(path);
        var file = new FileStream(path, FileMode.Open, FileAccess.ReadWrite, FileShare.Read);
        var npy = new NpyAppender(path, file, descr, width, NpyFormat.ElementBytes(descr));
        long length = NpyFormat.HeaderBytes + (rows * npy.RowBytes);
        if (file.Length < length)
        {
            file.Dispose();
            throw new IOException(string.Create(CultureInfo.InvariantCulture,
                $"{path} holds {file.Length} bytes; the {rows} committed rows need {length}: the run folder was changed since it was written. Start over with --overwrite."));
        }
        file.SetLength(length);
        npy.WriteHeader(rows);
        file.Seek(0, SeekOrigin.End);
        return npy;
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
