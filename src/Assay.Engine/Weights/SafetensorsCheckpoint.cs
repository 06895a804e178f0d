using System.Text.Json;

namespace Assay.Weights;

/// <summary>
/// The safetensors files of one model folder: <c>model.safetensors</c>, or the shards named by
/// <c>model.safetensors.index.json</c> (its "weight_map" maps each tensor name to its shard), or else the one
/// <c>*.safetensors</c> file in the folder. Tensor names are unique across shards and every mapping is checked
/// against the shards' own headers.
/// </summary>
public sealed class SafetensorsCheckpoint : IDisposable
{
    /// <summary>The file name of the single-file layout.</summary>
    public const string SingleFileName = "model.safetensors";

    /// <summary>The file name of the shard index.</summary>
    public const string IndexFileName = "model.safetensors.index.json";

    private readonly List<SafetensorsFile> _files;
    private readonly Dictionary<string, (TensorInfo Info, SafetensorsFile File)> _byName;

    private SafetensorsCheckpoint(string folder, string? indexPath, List<SafetensorsFile> files,
        Dictionary<string, (TensorInfo, SafetensorsFile)> byName)
    {
        Folder = folder;
        IndexPath = indexPath;
        _files = files;
        _byName = byName;
    }

    /// <summary>The model folder.</summary>
    public string Folder { get; }

    /// <summary>The shard index's path, or null for a single-file checkpoint.</summary>
    public string? IndexPath { get; }

    /// <summary>The opened files, in shard order.</summary>
    public IReadOnlyList<SafetensorsFile> Files => _files;

    /// <summary>Every tensor of every file.</summary>
    public IEnumerable<TensorInfo> Tensors => _files.SelectMany(f => f.Tensors);

    /// <summary>Opens the safetensors files of a model folder.</summary>
    /// <exception cref="WeightsFormatException">No weights are found, or a file or the index is invalid.</exception>
    public static SafetensorsCheckpoint Open(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        string index = Path.Combine(folder, IndexFileName);
        if (File.Exists(index))
        {
            return OpenSharded(folder, index);
        }

        string single = Path.Combine(folder, SingleFileName);
        if (!File.Exists(single))
        {
            string[] candidates = Directory.GetFiles(folder, "*.safetensors");
            if (candidates.Length != 1)
            {
                throw new WeightsFormatException(folder, null, candidates.Length == 0
                    ? $"no weights: expected {SingleFileName}, or {IndexFileName} with its shards"
                    : $"{candidates.Length} .safetensors files and no {IndexFileName} to say how they fit together");
            }
            single = candidates[0];
        }

        SafetensorsFile file = SafetensorsFile.Open(single);
        var byName = new Dictionary<string, (TensorInfo, SafetensorsFile)>(StringComparer.Ordinal);
        foreach (TensorInfo t in file.Tensors)
        {
            byName.Add(t.Name, (t, file));
        }
        return new SafetensorsCheckpoint(folder, null, [file], byName);
    }

    /// <summary>Finds a tensor by name in any file.</summary>
    public bool TryGetTensor(string name, [System.Diagnostics.CodeAnalysis.NotNullWhen(true)] out TensorInfo? tensor)
    {
        bool found = _byName.TryGetValue(name, out (TensorInfo Info, SafetensorsFile File) entry);
        tensor = entry.Info;
        return found;
    }

    /// <summary>Converts a floating-point tensor to float32; see <see cref="SafetensorsFile.ReadFloat32(TensorInfo, Span{float})"/>.</summary>
    public void ReadFloat32(TensorInfo tensor, Span<float> destination)
    {
        ArgumentNullException.ThrowIfNull(tensor);
        if (!_byName.TryGetValue(tensor.Name, out (TensorInfo Info, SafetensorsFile File) entry))
        {
            throw new ArgumentException($"tensor '{tensor.Name}' is not in this checkpoint", nameof(tensor));
        }
        entry.File.ReadFloat32(tensor, destination);
    }

    /// <summary>
    /// The first NaN or infinity stored in any tensor, in name order, or null: a scan of every value (converted in
    /// blocks, so memory stays small), as <c>assay inspect</c> runs it. Loading does not scan; the forward pass checks
    /// its outputs instead.
    /// </summary>
    public NonFiniteTensorValue? FirstNonFiniteValue()
    {
        const int Block = 1 << 20;
        float[] buffer = new float[Block];
        foreach (TensorInfo t in Tensors.Where(t => t.DType.IsParameterType()).OrderBy(t => t.Name, StringComparer.Ordinal))
        {
            SafetensorsFile file = _byName[t.Name].File;
            for (long done = 0; done < t.ElementCount; done += Block)
            {
                int n = (int)Math.Min(Block, t.ElementCount - done);
                file.ReadFloat32(t, done, buffer.AsSpan(0, n));
                int i = NonFinite.First(buffer.AsSpan(0, n));
                if (i >= 0)
                {
                    return new NonFiniteTensorValue(t, done + i, buffer[i]);
                }
            }
            file.ReleasePages(t);
        }
        return null;
    }

    /// <summary>Elements <paramref name="first"/> … of a tensor of this checkpoint, converted to float32.</summary>
    internal void ReadFloat32(TensorInfo tensor, long first, Span<float> destination) =>
        _byName[tensor.Name].File.ReadFloat32(tensor, first, destination);

    /// <summary>Releases the mapped pages of elements <paramref name="first"/> … <paramref name="first"/> + <paramref name="count"/> − 1 of a tensor (see <see cref="SafetensorsFile.ReleasePages(TensorInfo, long, long)"/>).</summary>
    internal void ReleasePages(TensorInfo tensor, long first, long count) => _byName[tensor.Name].File.ReleasePages(tensor, first, count);

    /// <summary>Lets the tensor's mapped pages go once it has been converted (see <see cref="SafetensorsFile"/>).</summary>
    internal void ReleasePages(TensorInfo tensor)
    {
        if (_byName.TryGetValue(tensor.Name, out (TensorInfo Info, SafetensorsFile File) entry))
        {
            entry.File.ReleasePages(tensor);
        }
    }

    /// <inheritdoc />
    public void Dispose()
    {
        foreach (SafetensorsFile f in _files)
        {
            f.Dispose();
        }
    }

    private static SafetensorsCheckpoint OpenSharded(string folder, string indexPath)
    {
        Dictionary<string, string> weightMap = ReadWeightMap(indexPath);
        var files = new List<SafetensorsFile>();
        try
        {
            var byShard = new Dictionary<string, SafetensorsFile>(StringComparer.Ordinal);
            foreach (string shard in weightMap.Values.Distinct(StringComparer.Ordinal).Order(StringComparer.Ordinal))
            {
                string shardPath = Path.Combine(folder, shard);
                if (!File.Exists(shardPath))
                {
                    throw new WeightsFormatException(indexPath, null, $"shard '{Echo.Of(shard)}' named in weight_map is not in the folder");
                }
                SafetensorsFile f = SafetensorsFile.Open(shardPath);
                files.Add(f);
                byShard.Add(shard, f);
            }

            var byName = new Dictionary<string, (TensorInfo, SafetensorsFile)>(StringComparer.Ordinal);
            foreach (SafetensorsFile f in files)
            {
                foreach (TensorInfo t in f.Tensors)
                {
                    if (byName.TryGetValue(t.Name, out (TensorInfo, SafetensorsFile File) other))
                    {
                        throw new WeightsFormatException(f.FilePath, t.Name, $"also stored in {other.File.FilePath}");
                    }
                    if (!weightMap.TryGetValue(t.Name, out string? mapped))
                    {
                        throw new WeightsFormatException(indexPath, t.Name, $"stored in {f.FilePath} but missing from weight_map");
                    }
                    if (!ReferenceEquals(byShard[mapped], f))
                    {
                        throw new WeightsFormatException(indexPath, t.Name, $"weight_map says '{Echo.Of(mapped)}'; the tensor is in {f.FilePath}");
                    }
                    byName.Add(t.Name, (t, f));
                }
            }
            foreach ((string name, string shard) in weightMap)
            {
                if (!byName.ContainsKey(name))
                {
                    throw new WeightsFormatException(indexPath, name, $"weight_map says '{Echo.Of(shard)}', which does not hold it");
                }
            }
            return new SafetensorsCheckpoint(folder, indexPath, files, byName);
        }
        catch
        {
            foreach (SafetensorsFile f in files)
            {
                f.Dispose();
            }
            throw;
        }
    }

    private static Dictionary<string, string> ReadWeightMap(string indexPath)
    {
        JsonDocument doc = JsonInput.TryParse(InputFile.ReadAllBytes(indexPath), maxDepth: 8, out string problem)
            ?? throw new WeightsFormatException(indexPath, null, problem);
        using (doc)
        {
            if (doc.RootElement.ValueKind != JsonValueKind.Object
                || !doc.RootElement.TryGetProperty("weight_map", out JsonElement map)
                || map.ValueKind != JsonValueKind.Object)
            {
                throw new WeightsFormatException(indexPath, null, "expected an object with a 'weight_map' object");
            }
            var result = new Dictionary<string, string>(StringComparer.Ordinal);
            foreach (JsonProperty p in map.EnumerateObject())
            {
                if (p.Value.ValueKind != JsonValueKind.String)
                {
                    throw new WeightsFormatException(indexPath, p.Name, $"weight_map value must be a file name; found {p.Value.ValueKind}");
                }
                string shard = p.Value.GetString()!;
                // A shard is a plain file name beside the index: no folders, so an index cannot point outside its folder.
                if (shard.Length == 0 || shard != Path.GetFileName(shard) || shard is "." or ".."
                    || !shard.EndsWith(".safetensors", StringComparison.Ordinal))
                {
                    throw new WeightsFormatException(indexPath, p.Name,
                        $"weight_map names '{shard}'; expected a plain *.safetensors file name in the same folder");
                }
                if (!result.TryAdd(p.Name, shard))
                {
                    throw new WeightsFormatException(indexPath, p.Name, "appears twice in weight_map");
                }
            }
            if (result.Count == 0)
            {
                throw new WeightsFormatException(indexPath, null, "weight_map is empty");
            }
            return result;
        }
    }
}
