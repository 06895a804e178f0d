using System.Buffers.Binary;
using System.IO.Compression;
using System.Text;

namespace Assay.Datasets;

/// <summary>
/// Reads the character-vector variables of an R lazy-load database (a package's data/Rdata.rdx + Rdata.rdb), as R
/// itself writes them: the .rdx is a zlib stream, after a 4-byte big-endian length, of R's XDR serialization
/// (format version 2 or 3) of list(variables = list(name = c(offset, length), …), …); each variable is, at that offset
/// of the .rdb, a 4-byte big-endian uncompressed length followed by a zlib stream of the same serialization. Only what those files hold is understood: NULL, symbols, pairlists, references,
/// character, logical, integer, real and generic vectors, with attributes.
/// </summary>
internal static class RLazyLoadDb
{
    public static Dictionary<string, string[]> ReadCharacterVariables(string rdxPath)
    {
        string rdbPath = Path.ChangeExtension(rdxPath, ".rdb");
        object? index;
        using (var gzip = new GZipStream(File.OpenRead(rdxPath), CompressionMode.Decompress))
        using (var buffer = new MemoryStream())
        {
            gzip.CopyTo(buffer);
            index = Unserialize(buffer.ToArray());
        }
        if (index is not RList top || top.Get("variables") is not RList variables)
        {
            throw new InvalidDataException($"{rdxPath}: no variables list");
        }
        byte[] rdb = File.ReadAllBytes(rdbPath);
        var result = new Dictionary<string, string[]>(StringComparer.Ordinal);
        for (int i = 0; i < variables.Items.Count; i++)
        {
            if (variables.Items[i] is int[] { Length: 2 } span && Unserialize(Inflate(rdb, span[0])) is string?[] lines)
            {
                result[variables.Names[i]] = [.. lines.Select(l => l ?? "")];
            }
        }
        return result;
    }

    private static byte[] Inflate(byte[] data, int offset)
    {
        int length = BinaryPrimitives.ReadInt32BigEndian(data.AsSpan(offset));
        using var z = new ZLibStream(new MemoryStream(data, offset + 4, data.Length - offset - 4), CompressionMode.Decompress);
        byte[] result = new byte[length];
        z.ReadExactly(result);
        return result;
    }

    private static object? Unserialize(byte[] data)
    {
        if (data.Length < 2 || data[0] != (byte)'X' || data[1] != (byte)'\n')
        {
            throw new InvalidDataException("not R's XDR serialization");
        }
        var r = new Reader(data, 2);
        int version = r.Int();
        r.Int();
        r.Int();
        if (version == 3)
        {
            r.Bytes(r.Int());   // native encoding name
        }
        return r.Item(new List<object?>());
    }

    /// <summary>A generic vector with its names attribute (empty names when it has none).</summary>
    private sealed record RList(List<object?> Items, string[] Names)
    {
        public object? Get(string name) => Array.IndexOf(Names, name) is int i and >= 0 ? Items[i] : null;
    }

    private sealed record RSymbol(string Name);

    private sealed class Reader(byte[] data, int position)
    {
        private int _position = position;

        public int Int()
        {
            int v = BinaryPrimitives.ReadInt32BigEndian(data.AsSpan(_position));
            _position += 4;
            return v;
        }

        public ReadOnlySpan<byte> Bytes(int n)
        {
            ReadOnlySpan<byte> s = data.AsSpan(_position, n);
            _position += n;
            return s;
        }

        public object? Item(List<object?> refs)
        {
            int flags = Int();
            int type = flags & 0xFF;
            bool hasAttributes = (flags & (1 << 9)) != 0, hasTag = (flags & (1 << 10)) != 0;
            switch (type)
            {
                case 254:   // NILVALUE_SXP
                    return null;
                case 255:   // REFSXP: index in the high bits, or in the next int when they are 0
                {
                    int index = flags >> 8;
                    return refs[(index == 0 ? Int() : index) - 1];
                }
                case 1:     // SYMSXP
                {
                    var symbol = new RSymbol((string?)Item(refs) ?? "");
                    refs.Add(symbol);
                    return symbol;
                }
                case 2:     // LISTSXP: attributes, tag, head, then the rest of the pairlist
                {
                    var pairs = new List<(string? Tag, object? Value)>();
                    while (true)
                    {
                        if (hasAttributes)
                        {
                            Item(refs);
                        }
                        string? tag = hasTag ? (Item(refs) as RSymbol)?.Name : null;
                        pairs.Add((tag, Item(refs)));
                        int next = Int();
                        if ((next & 0xFF) != 2)
                        {
                            _position -= 4;
                            Item(refs);   // the terminating NULL
                            return pairs;
                        }
                        hasAttributes = (next & (1 << 9)) != 0;
                        hasTag = (next & (1 << 10)) != 0;
                    }
                }
                case 9:     // CHARSXP
                {
                    int n = Int();
                    return n < 0 ? null : Encoding.UTF8.GetString(Bytes(n));
                }
                case 10:    // LGLSXP
                case 13:    // INTSXP
                {
                    int[] v = new int[Length()];
                    for (int i = 0; i < v.Length; i++)
                    {
                        v[i] = Int();
                    }
                    return WithAttributes(v, hasAttributes, refs);
                }
                case 14:    // REALSXP
                {
                    double[] v = new double[Length()];
                    for (int i = 0; i < v.Length; i++)
                    {
                        v[i] = BinaryPrimitives.ReadDoubleBigEndian(Bytes(8));
                    }
                    return WithAttributes(v, hasAttributes, refs);
                }
                case 16:    // STRSXP
                {
                    string?[] v = new string?[Length()];
                    for (int i = 0; i < v.Length; i++)
                    {
                        v[i] = (string?)Item(refs);
                    }
                    return WithAttributes(v, hasAttributes, refs);
                }
                case 19:    // VECSXP
                {
                    var items = new List<object?>();
                    int n = Length();
                    for (int i = 0; i < n; i++)
                    {
                        items.Add(Item(refs));
                    }
                    string[] names = [];
                    if (hasAttributes && Item(refs) is List<(string? Tag, object? Value)> attributes)
                    {
                        names = attributes.FirstOrDefault(a => a.Tag == "names").Value is string?[] s ? [.. s.Select(x => x ?? "")] : [];
                    }
                    return new RList(items, names);
                }
                default:
                    throw new InvalidDataException($"R serialization: type {type} is not supported");
            }
        }

        private int Length()
        {
            int n = Int();
            if (n == -1)
            {
                throw new InvalidDataException("R serialization: long vectors are not supported");
            }
            return n;
        }

        private object WithAttributes(object value, bool hasAttributes, List<object?> refs)
        {
            if (hasAttributes)
            {
                Item(refs);
            }
            return value;
        }
    }
}
