using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Support;
using Assay.Tokenization;
using Assay.Weights;

namespace Assay.Tests.Model;

/// <summary>Binding a checkpoint to its config: the tensors the config implies, nothing else but known buffers.</summary>
public sealed class ModelWeightsTests : IDisposable
{
    private static readonly CheckpointSpec Small = new() { Width = 16, Heads = 2, Layers = 2, Context = 8 };
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    [Fact]
    public void Skips_mask_buffers_and_counts_parameters()
    {
        string folder = SyntheticCheckpoint.Write(Small, _temp.File("m"));
        using SafetensorsCheckpoint c = SafetensorsCheckpoint.Open(folder);
        CheckpointSummary s = LanguageModel.CheckCheckpoint(c, Assay.Config.ModelConfig.Load(Path.Combine(folder, "config.json")), "config.json");
        Assert.Equal(4, s.SkippedBuffers);
        Assert.Equal("", s.NamePrefix);
        Assert.Equal(Assay.Config.ModelConfig.Load(Path.Combine(folder, "config.json")).ParameterCount, s.ParameterValues);
    }

    [Fact]
    public void Prefixed_names_give_the_same_model()
    {
        LanguageModel a = LanguageModel.Open(SyntheticCheckpoint.Write(Small, _temp.File("a")));
        LanguageModel b = LanguageModel.Open(SyntheticCheckpoint.Write(Small with { Prefix = true }, _temp.File("b")));
        int[][] seq = [[1, 2, 3, 4]];
        Assert.Equal(a.Forward(seq).LastLogits(0).ToArray(), b.Forward(seq).LastLogits(0).ToArray());
    }

    [Fact]
    public void Refuses_a_missing_tensor()
    {
        string folder = Rewrite(Small, tensors => tensors.RemoveAll(t => t.Name == "h.1.mlp.c_fc.bias"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Equal("h.1.mlp.c_fc.bias", e.TensorName);
        Assert.Contains("missing", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_wrong_shape_with_expected_and_found()
    {
        string folder = Rewrite(Small, tensors =>
        {
            int i = tensors.FindIndex(t => t.Name == "h.0.attn.c_attn.weight");
            tensors[i] = tensors[i] with { Shape = [48, 16] };
        });
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Equal("h.0.attn.c_attn.weight", e.TensorName);
        Assert.Contains("shape [48, 16]", e.Message, StringComparison.Ordinal);
        Assert.Contains("implies [16, 48]", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_config_with_fewer_layers_than_the_file()
    {
        string folder = SyntheticCheckpoint.Write(Small, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(Small with { Layers = 1 }, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.StartsWith("h.1.", e.TensorName, StringComparison.Ordinal);
        Assert.Contains("not a parameter of the architecture", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_config_with_more_layers_than_the_file()
    {
        string folder = SyntheticCheckpoint.Write(Small, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(Small with { Layers = 3 }, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.StartsWith("h.2.", e.TensorName, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_an_untied_config_without_a_head()
    {
        string folder = SyntheticCheckpoint.Write(Small, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(Small with { Tied = false }, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Equal("lm_head.weight", e.TensorName);
    }

    [Fact]
    public void Refuses_a_tied_config_whose_stored_head_differs()
    {
        string folder = SyntheticCheckpoint.Write(Small with { Tied = false }, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(Small, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Equal("lm_head.weight", e.TensorName);
        Assert.Contains("differs from wte.weight", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("ln_f.bias", 2)]
    [InlineData("wte.weight", (16 * 70) + 3)]   // the embedding is packed a panel of 64 rows at a time: row 70 is in the second
    public void Refuses_a_non_finite_parameter(string tensor, int element)
    {
        string folder = WithNaN(tensor, element);
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Equal(tensor, e.TensorName);
        Assert.Contains($"element {element} is NaN", e.Message, StringComparison.Ordinal);
    }

    private string WithNaN(string tensor, int element) => Rewrite(Small, tensors =>
    {
        int i = tensors.FindIndex(t => t.Name == tensor);
        byte[] data = (byte[])tensors[i].Data.Clone();
        BitConverter.GetBytes(float.NaN).CopyTo(data, element * sizeof(float));
        tensors[i] = tensors[i] with { Data = data };
    });

    [Fact]
    public void A_tokenizer_error_is_reported_before_a_weights_error()
    {
        // The tokenizer is read on a second thread while the weights load; when both are broken the tokenizer's error
        // is the one reported, as when they were read one after the other (tokenizer first).
        string folder = WithNaN("ln_f.bias", 2);
        File.WriteAllText(Path.Combine(folder, "vocab.json"), "{\"a\": 0, \"b\": ");
        for (int attempt = 0; attempt < 5; attempt++)
        {
            var e = Assert.Throws<TokenizerFileException>(() => LanguageModel.Open(folder));
            Assert.Contains("vocab.json", e.Message, StringComparison.Ordinal);
        }
    }

    [Fact]
    public void Files_are_the_folders_files_hashed_at_open()
    {
        string folder = SyntheticCheckpoint.Write(Small, _temp.File("hashed"));
        LanguageModel model = LanguageModel.Open(folder);
        // Reference: coreutils sha256sum over the same files, in ordinal name order.
        string[] names = [.. Directory.GetFiles(folder).Select(Path.GetFileName).Order(StringComparer.Ordinal)!];
        Assert.Equal(names, model.Files.Select(f => f.Name));
        foreach (ModelFile f in model.Files)
        {
            string path = Path.Combine(folder, f.Name);
            Assert.Equal(new FileInfo(path).Length, f.Bytes);
            Assert.Equal(ChildProcess.Run("sha256sum", [path], folder).Split(' ')[0], f.Sha256);
        }
    }

    [Fact]
    public void Refuses_an_integer_parameter()
    {
        string folder = Rewrite(Small, tensors =>
        {
            int i = tensors.FindIndex(t => t.Name == "ln_f.bias");
            tensors[i] = tensors[i] with { DType = "I32" };
        });
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Contains("dtype I32", e.Message, StringComparison.Ordinal);
    }

    /// <summary>Writes a checkpoint, then rewrites its safetensors file after a change to the tensor list.</summary>
    private string Rewrite(CheckpointSpec spec, Action<List<RawTensor>> change)
    {
        string folder = SyntheticCheckpoint.Write(spec, _temp.File("m"));
        string path = Path.Combine(folder, "model.safetensors");
        List<RawTensor> tensors;
        using (SafetensorsFile f = SafetensorsFile.Open(path))
        {
            tensors = f.Tensors.Select(t => new RawTensor(t.Name, t.DType.Name(), [.. t.Shape], f.RawBytes(t).ToArray())).ToList();
        }
        change(tensors);
        SafetensorsWriter.Write(path, tensors);
        return folder;
    }
}
