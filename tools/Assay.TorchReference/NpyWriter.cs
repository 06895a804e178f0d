using System.Globalization;
using System.Text;

namespace Assay.TorchReference;

/// <summary>Writes float32 arrays in NumPy's .npy format, version 1.0 ('&lt;f4', C order, header padded to 64 bytes).</summary>
internal static class NpyWriter
{
    public static void Write(string path, float[] values, params long[] shape)
    {
        string dims = shape.Length == 1
            ? shape[0].ToString(CultureInfo.InvariantCulture) + ","
            : string.Join(", ", shape.Select(d => d.ToString(CultureInfo.InvariantCulture)));
        string dict = "{'descr': '<f4', 'fortran_order': False, 'shape': (" + dims + "), }";
        int total = 10 + dict.Length + 1;
        string header = dict + new string(' ', (64 - (total % 64)) % 64) + "\n";
        using var f = File.Create(path);
        f.Write([0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0]);
        f.Write(BitConverter.GetBytes((ushort)header.Length));
        f.Write(Encoding.ASCII.GetBytes(header));
        byte[] data = new byte[values.Length * 4];
        Buffer.BlockCopy(values, 0, data, 0, data.Length);
        f.Write(data);
    }
}
