using System.Buffers.Binary;
using System.Globalization;
using System.Text;
using System.Text.RegularExpressions;

namespace Assay.Output;

/// <summary>
/// The NumPy .npy files of a run folder: format version 1.0 (magic, version, little-endian header length, a
/// Python-literal header dict padded with spaces to a 64-byte boundary and ending in a newline, then the rows in C
/// order), 2-D, with a header of a fixed <see cref="HeaderBytes"/> so the row count can be rewritten in place.
/// </summary>
internal static partial class NpyFormat
{
    /// <summary>Bytes before the data: room for any 64-bit row count, and a multiple of 64 as NumPy aligns it.</summary>
    public const int HeaderBytes = 128;

    /// <summary>NumPy's little-endian float32.</summary>
    public const string Float32 = "<f4";

    /// <summary>NumPy's little-endian float16.</summary>
    public const string Float16 = "<f2";

    /// <summary>NumPy's little-endian int32.</summary>
    public const string Int32 = "<i4";

    /// <summary>NumPy's little-endian float64 (written by the tests' reference data, never by a run).</summary>
    public const string Float64 = "<f8";

    private static readonly byte[] Magic = [0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0];

    /// <summary>Bytes per element of a dtype of this format, or 0 for any other.</summary>
    public static int ElementBytes(string descr) => descr switch
    {
        Float32 or Int32 => 4,
        Float16 => 2,
        Float64 => 8,
        _ => 0,
    };

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

    /// <summary>The dtype and 2-D shape of a file's header, and where its data begins; null when it is not a 2-D .npy of a dtype a run writes.</summary>
    public static (string Descr, long Rows, int Width, int DataOffset)? ReadHeader(ReadOnlySpan<byte> file)
    {
        if (file.Length < 10 || !file[..6].SequenceEqual(Magic.AsSpan(0, 6)))
        {
            return null;
        }
        int headerLength = BinaryPrimitives.ReadUInt16LittleEndian(file[8..]);
        if (file.Length < 10 + headerLength)
        {
            return null;
        }
        Match m = HeaderDict().Match(Encoding.ASCII.GetString(file.Slice(10, headerLength)));
        if (!m.Success || ElementBytes(m.Groups[1].Value) == 0
            || !long.TryParse(m.Groups[2].Value, NumberStyles.None, CultureInfo.InvariantCulture, out long rows)
            || !int.TryParse(m.Groups[3].Value, NumberStyles.None, CultureInfo.InvariantCulture, out int width))
        {
            return null;
        }
        return (m.Groups[1].Value, rows, width, 10 + headerLength);
    }

    [GeneratedRegex(@"'descr':\s*'([<|][fi][248])'.*'shape':\s*\((\d+),\s*(\d+)\)")]
    private static partial Regex HeaderDict();
}
