using System.Buffers.Binary;
using System.Text;
using System.Text.Json;

namespace Assay.Fixtures;

/// <summary>One tensor to write: its name, dtype spelling, shape and raw little-endian bytes.</summary>
public sealed record RawTensor(string Name, string DType, long[] Shape, byte[] Data);

/// <summary>
/// Writes safetensors files from the open format's description: 8-byte little-endian header length, JSON header
/// (padded with spaces to a multiple of 8), then the tensors' bytes in the given order.
/// </summary>
public static class SafetensorsWriter
{
    public static void Write(string path, IReadOnlyList<RawTensor> tensors, IReadOnlyDictionary<string, string>? metadata = null)
    {
        byte[] header = Header(tensors, metadata);
        using FileStream stream = Create(path, header);
        foreach (RawTensor t in tensors)
        {
            stream.Write(t.Data);
        }
    }

    /// <summary>
    /// Writes the same bytes as <see cref="Write"/>, holding one tensor at a time: each is written to a temporary file
    /// beside <paramref name="path"/> as it comes and then dropped, and the header and that data make the file. For
    /// checkpoints larger than memory (an 8B shape is 16 GB in bfloat16).
    /// </summary>
    public static void WriteStreamed(string path, IEnumerable<RawTensor> tensors, IReadOnlyDictionary<string, string>? metadata = null)
    {
        string dataPath = path + ".data";
        var entries = new List<(string Name, string DType, long[] Shape, long Bytes)>();
        try
        {
            using (var data = new FileStream(dataPath, FileMode.Create, FileAccess.Write))
            {
                foreach (RawTensor t in tensors)
                {
                    data.Write(t.Data);
                    entries.Add((t.Name, t.DType, t.Shape, t.Data.LongLength));
                }
            }
            byte[] header = Header(entries, metadata);
            using FileStream stream = Create(path, header);
            using var source = new FileStream(dataPath, FileMode.Open, FileAccess.Read);
            source.CopyTo(stream, 1 << 22);
        }
        finally
        {
            File.Delete(dataPath);
        }
    }

    /// <summary>Creates <paramref name="path"/> holding the 8-byte header length and the header.</summary>
    private static FileStream Create(string path, byte[] header)
    {
        var stream = new FileStream(path, FileMode.Create, FileAccess.Write);
        Span<byte> length = stackalloc byte[8];
        BinaryPrimitives.WriteUInt64LittleEndian(length, (ulong)header.Length);
        stream.Write(length);
        stream.Write(header);
        return stream;
    }

    public static byte[] Header(IReadOnlyList<RawTensor> tensors, IReadOnlyDictionary<string, string>? metadata) =>
        Header([.. tensors.Select(t => (t.Name, t.DType, t.Shape, t.Data.LongLength))], metadata);

    private static byte[] Header(IReadOnlyList<(string Name, string DType, long[] Shape, long Bytes)> tensors, IReadOnlyDictionary<string, string>? metadata)
    {
        using var buffer = new MemoryStream();
        using (var json = new Utf8JsonWriter(buffer))
        {
            json.WriteStartObject();
            if (metadata is not null)
            {
                json.WriteStartObject("__metadata__");
                foreach ((string k, string v) in metadata)
                {
                    json.WriteString(k, v);
                }
                json.WriteEndObject();
            }
            long offset = 0;
            foreach ((string Name, string DType, long[] Shape, long Bytes) t in tensors)
            {
                json.WriteStartObject(t.Name);
                json.WriteString("dtype", t.DType);
                json.WriteStartArray("shape");
                foreach (long d in t.Shape)
                {
                    json.WriteNumberValue(d);
                }
                json.WriteEndArray();
                json.WriteStartArray("data_offsets");
                json.WriteNumberValue(offset);
                json.WriteNumberValue(offset + t.Bytes);
                json.WriteEndArray();
                json.WriteEndObject();
                offset += t.Bytes;
            }
            json.WriteEndObject();
        }
        int padded = (int)((buffer.Length + 7) / 8 * 8);
        byte[] header = new byte[padded];
        buffer.ToArray().CopyTo(header, 0);
        header.AsSpan((int)buffer.Length).Fill((byte)' ');
        return header;
    }

    /// <summary>Encodes float32 values as F32, F16 (round to nearest even) or BF16 (round to nearest even) bytes.</summary>
    public static byte[] Encode(ReadOnlySpan<float> values, string dtype)
    {
        switch (dtype)
        {
            case "F32":
            {
                byte[] b = new byte[values.Length * 4];
                for (int i = 0; i < values.Length; i++)
                {
                    BinaryPrimitives.WriteSingleLittleEndian(b.AsSpan(i * 4), values[i]);
                }
                return b;
            }
            case "F16":
            {
                byte[] b = new byte[values.Length * 2];
                for (int i = 0; i < values.Length; i++)
                {
                    BinaryPrimitives.WriteHalfLittleEndian(b.AsSpan(i * 2), (Half)values[i]);
                }
                return b;
            }
            case "BF16":
            {
                byte[] b = new byte[values.Length * 2];
                for (int i = 0; i < values.Length; i++)
                {
                    BinaryPrimitives.WriteUInt16LittleEndian(b.AsSpan(i * 2), ToBFloat16(values[i]));
                }
                return b;
            }
            default:
                throw new ArgumentException($"no float encoding for dtype {dtype}", nameof(dtype));
        }
    }

    /// <summary>float32 → bfloat16 bits, rounding to nearest even (finite inputs).</summary>
    public static ushort ToBFloat16(float value)
    {
        uint bits = BitConverter.SingleToUInt32Bits(value);
        uint rounding = 0x7FFFu + ((bits >> 16) & 1u);
        return (ushort)((bits + rounding) >> 16);
    }

    /// <summary>A UTF-8 JSON string of the header alone, for tests that hand-craft bad files.</summary>
    public static byte[] FileFromHeaderText(string headerJson, byte[] data)
    {
        byte[] header = Encoding.UTF8.GetBytes(headerJson);
        byte[] file = new byte[8 + header.Length + data.Length];
        BinaryPrimitives.WriteUInt64LittleEndian(file, (ulong)header.Length);
        header.CopyTo(file, 8);
        data.CopyTo(file, 8 + header.Length);
        return file;
    }
}
