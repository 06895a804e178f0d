using System.Buffers.Binary;
using System.Globalization;
using System.Text;

namespace Assay.Output;

/// <summary>
/// A 2-D NumPy .npy file (format version 1.0: magic, version, little-endian header length, a Python-literal header
/// dict padded with spaces to a 64-byte boundary and ending in a newline, then the rows in C order) that grows by
/// appending rows. The header has a fixed size of <see cref="HeaderBytes"/>, so the row count can be rewritten in
/// place at every commit and the file is always a valid array of the rows committed so far.
/// </summary>
internal sealed class NpyAppender : IDisposable
{
    /// <summary>Bytes before the data: room for any 64-bit row count, and a multiple of 64 as NumPy aligns it.</summary>
    public const int HeaderBytes = 128;

    private static readonly byte[] Magic = [0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0];

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
    public static NpyAppender Create(string path, string descr, int width, int elementBytes)
    {
        var file = new FileStream(path, FileMode.Create, FileAccess.ReadWrite, FileShare.Read);
        var npy = new NpyAppender(path, file, descr, width, elementBytes);
        npy.WriteHeader(0);
        return npy;
    }

    /// <summary>
    /// Opens a file an interrupted run left, keeping its first <paramref name="rows"/> rows and dropping anything
    /// after them (rows written after the last commit).
    /// </summary>
    /// <exception cref="IOException">The file is shorter than the committed rows: it was changed since.</exception>
    public static NpyAppender Reopen(string path, string descr, int width, int elementBytes, long rows)
    {
        var file = new FileStream(path, FileMode.Open, FileAccess.ReadWrite, FileShare.Read);
        var npy = new NpyAppender(path, file, descr, width, elementBytes);
        long length = HeaderBytes + (rows * npy.RowBytes);
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

    /// <summary>The header of a <paramref name="rows"/> × <paramref name="width"/> array.</summary>
    public static byte[] Header(string descr, long rows, int width)
    {
        string dict = string.Create(CultureInfo.InvariantCulture, $"{{'descr': '{descr}', 'fortran_order': False, 'shape': ({rows}, {width}), }}");
        int padded = HeaderBytes - Magic.Length - 2;
        byte[] header = new byte[HeaderBytes];
        Magic.CopyTo(header, 0);
        BinaryPrimitives.WriteUInt16LittleEndian(header.AsSpan(Magic.Length), (ushort)padded);
        Span<byte> text = header.AsSpan(Magic.Length + 2);
        text.Fill((byte)' ');
        Encoding.ASCII.GetBytes(dict, text);
        text[^1] = (byte)'\n';
        return header;
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
        _file.Write(Header(_descr, rows, Width));
    }
}
