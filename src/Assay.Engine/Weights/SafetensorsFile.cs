using System.Buffers.Binary;
using System.IO.MemoryMappedFiles;
using System.Numerics.Tensors;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using System.Text.Json;

namespace Assay.Weights;

/// <summary>
/// A memory-mapped safetensors file: an 8-byte little-endian header length N, N bytes of UTF-8 JSON describing each
/// tensor (dtype, shape, byte offsets relative to the end of the header) and an optional "__metadata__" map of
/// strings, then the raw little-endian tensor bytes. The whole header is validated on open, before any tensor is read:
/// header length against the file size and a cap, well-formed JSON, unique names, known dtypes, shape product × element
/// size equal to the byte span, and spans that tile the data area exactly (inside it, no overlap, no gap).
/// </summary>
public sealed unsafe class SafetensorsFile : IDisposable
{
    /// <summary>The largest header accepted, in bytes (100 MiB; a larger one is refused before it is read).</summary>
    public const long MaxHeaderBytes = 100L << 20;

    /// <summary>The highest tensor rank accepted.</summary>
    public const int MaxRank = 8;

    /// <summary>The most tensors one file may declare (GPT-2 XL has 581; refused before any entry is converted).</summary>
    public const int MaxTensors = 1 << 16;

    private const string MetadataKey = "__metadata__";

    private readonly MemoryMappedFile _map;
    private readonly MemoryMappedViewAccessor _view;
    private readonly byte* _base;
    private readonly long _dataStart;
    private readonly Dictionary<string, TensorInfo> _byName;

    private SafetensorsFile(string path, MemoryMappedFile map, MemoryMappedViewAccessor view, byte* basePointer,
        long length, long dataStart, List<TensorInfo> tensors, Dictionary<string, string> metadata)
    {
        FilePath = path;
        _map = map;
        _view = view;
        _base = basePointer;
        FileLength = length;
        _dataStart = dataStart;
        Tensors = tensors;
        Metadata = metadata;
        _byName = new Dictionary<string, TensorInfo>(tensors.Count, StringComparer.Ordinal);
        foreach (TensorInfo t in tensors)
        {
            _byName.Add(t.Name, t);
        }
    }

    /// <summary>The file's path as given to <see cref="Open"/>.</summary>
    public string FilePath { get; }

    /// <summary>The file's length in bytes.</summary>
    public long FileLength { get; }

    /// <summary>Every tensor in the file, in the order of their bytes.</summary>
    public IReadOnlyList<TensorInfo> Tensors { get; }

    /// <summary>The header's "__metadata__" map (empty when absent).</summary>
    public IReadOnlyDictionary<string, string> Metadata { get; }

    /// <summary>Opens and validates a safetensors file.</summary>
    /// <exception cref="WeightsFormatException">The file is not a valid safetensors file; the message says where and why.</exception>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    public static SafetensorsFile Open(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        FileStream stream = InputFile.OpenRead(path);
        long length = stream.Length;
        if (length < 8)
        {
            stream.Dispose();
            throw new WeightsFormatException(path, null,
                $"file is {length} bytes long; a safetensors file starts with an 8-byte header length");
        }

        var map = MemoryMappedFile.CreateFromFile(stream, null, 0, MemoryMappedFileAccess.Read, HandleInheritability.None, leaveOpen: false);
        MemoryMappedViewAccessor? view = null;
        bool acquired = false;
        try
        {
            view = map.CreateViewAccessor(0, length, MemoryMappedFileAccess.Read);
            byte* p = null;
            view.SafeMemoryMappedViewHandle.AcquirePointer(ref p);
            acquired = true;
            p += view.PointerOffset;

            ulong headerLength = BinaryPrimitives.ReadUInt64LittleEndian(new ReadOnlySpan<byte>(p, 8));
            if (headerLength > MaxHeaderBytes)
            {
                throw new WeightsFormatException(path, null,
                    $"header length {headerLength} bytes is over the cap of {MaxHeaderBytes} bytes; the file is damaged or not a safetensors file");
            }
            if ((long)headerLength > length - 8)
            {
                throw new WeightsFormatException(path, null,
                    $"header length {headerLength} bytes runs past the end of the file ({length - 8} bytes after the length field); the file is truncated or not a safetensors file");
            }

            long dataStart = 8 + (long)headerLength;
            var header = new ReadOnlySpan<byte>(p + 8, (int)headerLength);
            (List<TensorInfo> tensors, Dictionary<string, string> metadata) = ParseHeader(path, header, length - dataStart);
            var file = new SafetensorsFile(path, map, view, p, length, dataStart, tensors, metadata);
            return file;
        }
        catch
        {
            if (acquired)
            {
                view!.SafeMemoryMappedViewHandle.ReleasePointer();
            }
            view?.Dispose();
            map.Dispose();
            throw;
        }
    }

    /// <summary>Finds a tensor by name.</summary>
    public bool TryGetTensor(string name, [System.Diagnostics.CodeAnalysis.NotNullWhen(true)] out TensorInfo? tensor) =>
        _byName.TryGetValue(name, out tensor);

    /// <summary>
    /// Converts a floating-point tensor (F32, F16 or BF16) to float32 into <paramref name="destination"/>, which must
    /// hold exactly <see cref="TensorInfo.ElementCount"/> elements, in the stored (row-major) order.
    /// </summary>
    public void ReadFloat32(TensorInfo tensor, Span<float> destination)
    {
        ArgumentNullException.ThrowIfNull(tensor);
        if (!ReferenceEquals(_byName.GetValueOrDefault(tensor.Name), tensor))
        {
            throw new ArgumentException($"tensor '{tensor.Name}' does not belong to {FilePath}", nameof(tensor));
        }
        if (destination.Length != tensor.ElementCount)
        {
            throw new ArgumentException(
                $"destination holds {destination.Length} elements; tensor '{tensor.Name}' has {tensor.ElementCount}", nameof(destination));
        }
        if (!tensor.DType.IsParameterType())
        {
            throw new WeightsFormatException(FilePath, tensor.Name,
                $"dtype {tensor.DType.Name()} cannot hold model parameters; expected F32, F16 or BF16");
        }

        ReadFloat32(tensor, 0, destination);
    }

    /// <summary>Converts <paramref name="destination"/>.Length elements of a checked floating-point tensor, from element <paramref name="first"/>.</summary>
    internal void ReadFloat32(TensorInfo tensor, long first, Span<float> destination)
    {
        ObjectDisposedException.ThrowIf(_view.SafeMemoryMappedViewHandle.IsClosed, this);
        if (first < 0 || first + destination.Length > tensor.ElementCount)
        {
            throw new ArgumentOutOfRangeException(nameof(first), first, $"elements {first} … {first + destination.Length} are outside tensor '{tensor.Name}'");
        }
        byte* src = _base + _dataStart + tensor.DataBegin + (first * tensor.DType.SizeInBytes());
        // Chunks keep every span under 2^31 bytes whatever the tensor's size.
        const int ChunkElements = 1 << 26;
        for (long done = 0; done < destination.Length; done += ChunkElements)
        {
            int n = (int)Math.Min(ChunkElements, destination.Length - done);
            Span<float> dst = destination.Slice((int)done, n);
            switch (tensor.DType)
            {
                case TensorDType.F32:
                    new ReadOnlySpan<float>(src + done * 4, n).CopyTo(dst);
                    break;
                case TensorDType.F16:
                    TensorPrimitives.ConvertToSingle(new ReadOnlySpan<Half>(src + done * 2, n), dst);
                    break;
                default:
                    WidenBFloat16(new ReadOnlySpan<ushort>(src + done * 2, n), dst);
                    break;
            }
        }
    }

    /// <summary>
    /// Tells the kernel this process is done with the tensor's mapped pages (Linux: madvise MADV_DONTNEED on the
    /// whole pages it spans), so a converted checkpoint does not stay resident beside its converted copy. The mapping
    /// is read-only and file-backed: a later read faults the pages in again from the page cache. Elsewhere a no-op.
    /// </summary>
    internal void ReleasePages(TensorInfo tensor) => ReleasePages(tensor, 0, tensor.ElementCount);

    /// <summary><see cref="ReleasePages(TensorInfo)"/> for the whole pages inside elements <paramref name="first"/> … <paramref name="first"/> + <paramref name="count"/> − 1.</summary>
    internal void ReleasePages(TensorInfo tensor, long first, long count)
    {
        if (!OperatingSystem.IsLinux() || count <= 0 || _view.SafeMemoryMappedViewHandle.IsClosed)
        {
            return;
        }
        long page = Environment.SystemPageSize, size = tensor.DType.SizeInBytes();
        long begin = (long)(_base + _dataStart + tensor.DataBegin) + (first * size);
        long end = begin + (count * size);
        long from = (begin + page - 1) / page * page;   // whole pages inside the range only
        long to = end / page * page;
        if (to > from)
        {
            _ = NativeMethods.madvise((nint)from, (nuint)(to - from), NativeMethods.MadviseDontNeed);
        }
    }

    /// <summary>The raw bytes of a tensor (for hashing and inspection); valid while the file is open.</summary>
    internal ReadOnlySpan<byte> RawBytes(TensorInfo tensor) =>
        new(_base + _dataStart + tensor.DataBegin, checked((int)tensor.ByteLength));

    /// <summary>bf16 → f32 is exact: the bf16 bits become the upper half of the f32 bits.</summary>
    internal static void WidenBFloat16(ReadOnlySpan<ushort> source, Span<float> destination)
    {
        Span<uint> bits = MemoryMarshal.Cast<float, uint>(destination);
        int i = 0;
        if (Vector256.IsHardwareAccelerated)
        {
            for (; i + 16 <= source.Length; i += 16)
            {
                (Vector256<uint> lower, Vector256<uint> upper) = Vector256.Widen(Vector256.Create(source.Slice(i, 16)));
                (lower << 16).CopyTo(bits.Slice(i, 8));
                (upper << 16).CopyTo(bits.Slice(i + 8, 8));
            }
        }
        for (; i < source.Length; i++)
        {
            bits[i] = (uint)source[i] << 16;
        }
    }

    /// <inheritdoc />
    public void Dispose()
    {
        if (!_view.SafeMemoryMappedViewHandle.IsClosed)
        {
            _view.SafeMemoryMappedViewHandle.ReleasePointer();
        }
        _view.Dispose();
        _map.Dispose();
    }

    private static (List<TensorInfo>, Dictionary<string, string>) ParseHeader(string path, ReadOnlySpan<byte> header, long dataLength)
    {
        JsonDocument doc = JsonInput.TryParse(header.ToArray(), maxDepth: 8, out string problem, callerNamesDuplicates: true)
            ?? throw new WeightsFormatException(path, null, $"header is {problem}");

        using (doc)
        {
            if (doc.RootElement.ValueKind != JsonValueKind.Object)
            {
                throw new WeightsFormatException(path, null,
                    $"header must be a JSON object; found {doc.RootElement.ValueKind}");
            }

            int declared = 0;
            foreach (JsonProperty _ in doc.RootElement.EnumerateObject())
            {
                if (++declared > MaxTensors + 1)
                {
                    throw new WeightsFormatException(path, null, $"header declares more than {MaxTensors} tensors, the cap; the file is damaged or not a model checkpoint");
                }
            }

            var tensors = new List<TensorInfo>();
            var metadata = new Dictionary<string, string>(StringComparer.Ordinal);
            var seen = new HashSet<string>(StringComparer.Ordinal);
            foreach (JsonProperty prop in doc.RootElement.EnumerateObject())
            {
                if (!seen.Add(prop.Name))
                {
                    throw new WeightsFormatException(path, prop.Name, "name appears twice in the header");
                }
                if (prop.Name == MetadataKey)
                {
                    ReadMetadata(path, prop.Value, metadata);
                    continue;
                }
                tensors.Add(ReadEntry(path, prop.Name, prop.Value, dataLength));
            }

            CheckTiling(path, tensors, dataLength);
            return (tensors, metadata);
        }
    }

    private static void ReadMetadata(string path, JsonElement value, Dictionary<string, string> metadata)
    {
        if (value.ValueKind != JsonValueKind.Object)
        {
            throw new WeightsFormatException(path, null, $"'{MetadataKey}' must be an object of strings; found {value.ValueKind}");
        }
        foreach (JsonProperty m in value.EnumerateObject())
        {
            if (m.Value.ValueKind != JsonValueKind.String)
            {
                throw new WeightsFormatException(path, null,
                    $"'{MetadataKey}' entry '{m.Name}' must be a string; found {m.Value.ValueKind}");
            }
            if (!metadata.TryAdd(m.Name, m.Value.GetString()!))
            {
                throw new WeightsFormatException(path, null, $"'{MetadataKey}' entry '{Echo.Of(m.Name)}' appears twice");
            }
        }
    }

    private static TensorInfo ReadEntry(string path, string name, JsonElement e, long dataLength)
    {
        if (e.ValueKind != JsonValueKind.Object)
        {
            throw new WeightsFormatException(path, name, $"entry must be an object with dtype, shape and data_offsets; found {e.ValueKind}");
        }
        if (!e.TryGetProperty("dtype", out JsonElement dtypeEl) || dtypeEl.ValueKind != JsonValueKind.String)
        {
            throw new WeightsFormatException(path, name, "entry has no string 'dtype'");
        }
        string dtypeText = dtypeEl.GetString()!;
        TensorDType dtype = TensorDTypes.Parse(dtypeText)
            ?? throw new WeightsFormatException(path, name,
                $"unknown dtype '{Echo.Of(dtypeText)}'; expected one of F32, F16, BF16, F64, F8_E4M3, F8_E5M2, I64, I32, I16, I8, U64, U32, U16, U8, BOOL");

        if (!e.TryGetProperty("shape", out JsonElement shapeEl) || shapeEl.ValueKind != JsonValueKind.Array)
        {
            throw new WeightsFormatException(path, name, "entry has no array 'shape'");
        }
        int rank = shapeEl.GetArrayLength();
        if (rank > MaxRank)
        {
            throw new WeightsFormatException(path, name, $"rank {rank} is over the cap of {MaxRank}");
        }
        var shape = new long[rank];
        long elements = 1;
        int i = 0;
        foreach (JsonElement d in shapeEl.EnumerateArray())
        {
            if (d.ValueKind != JsonValueKind.Number || !d.TryGetInt64(out long dim) || dim < 0)
            {
                throw new WeightsFormatException(path, name, $"shape entry {i} is {Echo.Of(d.GetRawText())}; expected a non-negative integer");
            }
            shape[i++] = dim;
            if (dim != 0 && elements > long.MaxValue / dim)
            {
                throw new WeightsFormatException(path, name, $"shape {TensorInfo.FormatShape(shape)} has more elements than 2^63");
            }
            elements *= dim;
        }

        if (!e.TryGetProperty("data_offsets", out JsonElement offEl) || offEl.ValueKind != JsonValueKind.Array || offEl.GetArrayLength() != 2)
        {
            throw new WeightsFormatException(path, name, "entry has no 'data_offsets' pair [begin, end]");
        }
        long begin = -1, end = -1;
        if (offEl[0].ValueKind != JsonValueKind.Number || offEl[1].ValueKind != JsonValueKind.Number
            || !offEl[0].TryGetInt64(out begin) || !offEl[1].TryGetInt64(out end) || begin < 0 || end < begin)
        {
            throw new WeightsFormatException(path, name,
                $"data_offsets {Echo.Of(offEl.GetRawText())} must be two integers with 0 <= begin <= end");
        }
        if (end > dataLength)
        {
            throw new WeightsFormatException(path, name,
                $"data_offsets [{begin}, {end}] run past the data area, which is {dataLength} bytes; the file is truncated");
        }

        int size = dtype.SizeInBytes();
        if (elements > long.MaxValue / size || elements * size != end - begin)
        {
            throw new WeightsFormatException(path, name,
                $"shape {TensorInfo.FormatShape(shape)} of {dtype.Name()} needs {(elements > long.MaxValue / size ? "more than 2^63" : (elements * size).ToString(System.Globalization.CultureInfo.InvariantCulture))} bytes; data_offsets span {end - begin}");
        }

        foreach (JsonProperty p in e.EnumerateObject())
        {
            if (p.Name is not ("dtype" or "shape" or "data_offsets"))
            {
                throw new WeightsFormatException(path, name, $"entry has unknown field '{Echo.Of(p.Name)}'");
            }
        }

        return new TensorInfo(name, dtype, shape, begin, end, path);
    }

    /// <summary>The spans must tile the data area: sorted by begin, each starts where the previous ended.</summary>
    private static void CheckTiling(string path, List<TensorInfo> tensors, long dataLength)
    {
        tensors.Sort(static (a, b) => a.DataBegin != b.DataBegin
            ? a.DataBegin.CompareTo(b.DataBegin)
            : a.DataEnd.CompareTo(b.DataEnd));
        long cursor = 0;
        TensorInfo? previous = null;
        foreach (TensorInfo t in tensors)
        {
            if (t.DataBegin < cursor)
            {
                throw new WeightsFormatException(path, t.Name,
                    $"bytes [{t.DataBegin}, {t.DataEnd}) overlap tensor '{previous!.Name}' at [{previous.DataBegin}, {previous.DataEnd})");
            }
            if (t.DataBegin > cursor)
            {
                throw new WeightsFormatException(path, t.Name,
                    $"starts at byte {t.DataBegin}, leaving a gap of {t.DataBegin - cursor} unindexed bytes after byte {cursor}");
            }
            cursor = t.DataEnd;
            previous = t;
        }
        if (cursor != dataLength)
        {
            throw new WeightsFormatException(path, null,
                $"tensors cover {cursor} bytes of the {dataLength}-byte data area; the rest is not indexed by any tensor");
        }
    }
}

/// <summary>The one libc call the loader makes.</summary>
internal static class NativeMethods
{
    /// <summary>MADV_DONTNEED on Linux.</summary>
    public const int MadviseDontNeed = 4;

    [System.Runtime.InteropServices.DllImport("libc", SetLastError = true)]
    [System.Runtime.InteropServices.DefaultDllImportSearchPaths(System.Runtime.InteropServices.DllImportSearchPath.SafeDirectories)]
    public static extern int madvise(nint address, nuint length, int advice);
}
