using System.Buffers.Binary;
using System.Text;
using System.Text.RegularExpressions;

namespace Assay.Tests.Support;

/// <summary>Reads NumPy .npy files (format versions 1–3, little-endian float32/float64, C order), as numpy writes them.</summary>
public static partial class Npy
{
    [GeneratedRegex(@"'descr':\s*'([^']+)'.*'fortran_order':\s*(True|False).*'shape':\s*\(([^)]*)\)")]
    private static partial Regex HeaderPattern();

    public static (double[] Values, int[] Shape) Read(string path)
    {
        byte[] b = File.ReadAllBytes(path);
        if (b.Length < 10 || b[0] != 0x93 || Encoding.ASCII.GetString(b, 1, 5) != "NUMPY")
        {
            throw new InvalidDataException($"{path}: not a .npy file");
        }
        int major = b[6];
        int headerLength = major == 1 ? BinaryPrimitives.ReadUInt16LittleEndian(b.AsSpan(8)) : (int)BinaryPrimitives.ReadUInt32LittleEndian(b.AsSpan(8));
        int headerStart = major == 1 ? 10 : 12;
        string header = Encoding.Latin1.GetString(b, headerStart, headerLength);
        Match m = HeaderPattern().Match(header);
        if (!m.Success || m.Groups[2].Value != "False")
        {
            throw new InvalidDataException($"{path}: unsupported header {header}");
        }
        int[] shape = m.Groups[3].Value.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries)
            .Select(s => int.Parse(s, System.Globalization.CultureInfo.InvariantCulture)).ToArray();
        long count = shape.Aggregate(1L, (a, d) => a * d);
        ReadOnlySpan<byte> data = b.AsSpan(headerStart + headerLength);
        double[] values = new double[count];
        switch (m.Groups[1].Value)
        {
            case "<f8":
                for (int i = 0; i < count; i++)
                {
                    values[i] = BinaryPrimitives.ReadDoubleLittleEndian(data[(i * 8)..]);
                }
                break;
            case "<f4":
                for (int i = 0; i < count; i++)
                {
                    values[i] = BinaryPrimitives.ReadSingleLittleEndian(data[(i * 4)..]);
                }
                break;
            default:
                throw new InvalidDataException($"{path}: dtype {m.Groups[1].Value} not supported by the test reader");
        }
        return (values, shape);
    }

    /// <summary>Writes a float64 matrix of the given width as .npy, through the engine's writer.</summary>
    public static void WriteFloat64(string path, double[] values, int width)
    {
        using var npy = Assay.Output.NpyAppender.Create(path, "<f8", width);
        npy.Append(System.Runtime.InteropServices.MemoryMarshal.AsBytes(values.AsSpan()));
        npy.Commit(values.Length / width);
    }
}
