using System.Text.Json;
using Assay.Fixtures;
using Assay.Tests.Support;
using Assay.Weights;

namespace Assay.Tests.Weights;

public sealed class SafetensorsCheckpointTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    [Fact]
    public void Sharded_checkpoint_holds_the_same_tensors_as_a_single_file()
    {
        var spec = new CheckpointSpec { Width = 16, Heads = 2, Layers = 2, Context = 8 };
        string single = SyntheticCheckpoint.Write(spec, _temp.File("single"));
        string sharded = SyntheticCheckpoint.Write(spec with { Shards = 3 }, _temp.File("sharded"));
        using SafetensorsCheckpoint a = SafetensorsCheckpoint.Open(single);
        using SafetensorsCheckpoint b = SafetensorsCheckpoint.Open(sharded);
        Assert.Equal(3, b.Files.Count);
        Assert.NotNull(b.IndexPath);
        Assert.Equal(a.Tensors.Select(t => t.Name).Order(), b.Tensors.Select(t => t.Name).Order());
        foreach (TensorInfo t in a.Tensors.Where(t => t.DType == TensorDType.F32))
        {
            Assert.True(b.TryGetTensor(t.Name, out TensorInfo? u));
            float[] x = new float[t.ElementCount], y = new float[u.ElementCount];
            a.ReadFloat32(t, x);
            b.ReadFloat32(u, y);
            Assert.Equal(x, y);
        }
    }

    [Fact]
    public void Refuses_a_folder_without_weights()
    {
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsCheckpoint.Open(_temp.Path));
        Assert.Contains("no weights", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_an_index_naming_a_missing_shard()
    {
        string folder = Sharded();
        File.Delete(Path.Combine(folder, "model-00002-of-00002.safetensors"));
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsCheckpoint.Open(folder));
        Assert.Contains("shard 'model-00002-of-00002.safetensors'", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_shard_path_outside_the_folder()
    {
        string folder = Sharded();
        RewriteMap(folder, map => map["wte.weight"] = "../elsewhere.safetensors");
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsCheckpoint.Open(folder));
        Assert.Equal("wte.weight", e.TensorName);
        Assert.Contains("plain *.safetensors file name", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_tensor_the_index_leaves_out()
    {
        string folder = Sharded();
        RewriteMap(folder, map => map.Remove("wpe.weight"));
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsCheckpoint.Open(folder));
        Assert.Equal("wpe.weight", e.TensorName);
        Assert.Contains("missing from weight_map", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_an_index_pointing_at_the_wrong_shard()
    {
        string folder = Sharded();
        RewriteMap(folder, map => map["wte.weight"] = "model-00002-of-00002.safetensors");
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsCheckpoint.Open(folder));
        Assert.Equal("wte.weight", e.TensorName);
    }

    [Fact]
    public void Refuses_a_tensor_stored_in_two_shards()
    {
        string folder = Sharded();
        string second = Path.Combine(folder, "model-00002-of-00002.safetensors");
        using (SafetensorsFile f = SafetensorsFile.Open(Path.Combine(folder, "model-00001-of-00002.safetensors")))
        {
            // Rewrite shard 2 with an extra copy of shard 1's first tensor.
            TensorInfo dup = f.Tensors[0];
            float[] v = new float[dup.ElementCount];
            f.ReadFloat32(dup, v);
            using SafetensorsFile g = SafetensorsFile.Open(second);
            var tensors = g.Tensors.Select(t => new RawTensor(t.Name, t.DType.Name(), [.. t.Shape], g.RawBytes(t).ToArray())).ToList();
            tensors.Add(new RawTensor(dup.Name, "F32", [.. dup.Shape], SafetensorsWriter.Encode(v, "F32")));
            g.Dispose();
            SafetensorsWriter.Write(second + ".new", tensors);
        }
        File.Move(second + ".new", second, overwrite: true);
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsCheckpoint.Open(folder));
        Assert.Contains("also stored in", e.Message, StringComparison.Ordinal);
    }

    private string Sharded() =>
        SyntheticCheckpoint.Write(new CheckpointSpec { Width = 16, Heads = 2, Layers = 1, Context = 8, Shards = 2 }, _temp.File("s"));

    private static void RewriteMap(string folder, Action<Dictionary<string, string>> change)
    {
        string index = Path.Combine(folder, SafetensorsCheckpoint.IndexFileName);
        var doc = JsonSerializer.Deserialize<Dictionary<string, JsonElement>>(File.ReadAllText(index))!;
        var map = doc["weight_map"].Deserialize<Dictionary<string, string>>()!;
        change(map);
        File.WriteAllText(index, JsonSerializer.Serialize(new { metadata = doc["metadata"], weight_map = map }));
    }
}
