using System.Globalization;
using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Config;
using Assay.Fixtures;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Cli;
using Assay.Tests.Output;
using Assay.Tests.Support;
using Assay.Weights;
using Xunit.Abstractions;

namespace Assay.Tests.Model;

/// <summary>
/// The rotary families end to end: bad checkpoints refused with the tensor and the config field named, inspect's
/// description, the memory estimate against what opening takes, int8 drift, and an extraction run through the CLI.
/// </summary>
public sealed class FamilyCheckpointTests(ITestOutputHelper output) : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    private static CheckpointSpec Llama => ForwardParityTests.Families["llama-gqa-width60"];

    private static CheckpointSpec NeoX => ForwardParityTests.Families["neox-parallel-pct06"];

    [Fact]
    public void A_key_value_head_count_other_than_the_checkpoint_is_refused_naming_the_tensor_and_field()
    {
        string folder = SyntheticCheckpoint.Write(Llama, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(Llama with { KeyValueHeads = 3 }, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Contains("model.layers.0.self_attn.k_proj.weight", e.Message, StringComparison.Ordinal);
        Assert.Contains("shape [20, 60]", e.Message, StringComparison.Ordinal);
        Assert.Contains("implies [30, 60] (num_key_value_heads 3 × head width 10)", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_missing_gate_tensor_is_refused_by_name()
    {
        string folder = SyntheticCheckpoint.Write(Llama, SyntheticCheckpoint.Parameters(Llama).Where(p => p.Name != "model.layers.1.mlp.gate_proj.weight"), _temp.File("m"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Contains("model.layers.1.mlp.gate_proj.weight", e.Message, StringComparison.Ordinal);
        Assert.Contains("missing", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_fused_qkv_of_the_wrong_width_is_refused()
    {
        IEnumerable<StoredParameter> parameters = SyntheticCheckpoint.Parameters(NeoX).Select(p => p.Name == "gpt_neox.layers.0.attention.query_key_value.weight"
            ? p with { Shape = [80, 40], Values = p.Values[..(80 * 40)] } : p);
        string folder = SyntheticCheckpoint.Write(NeoX, parameters, _temp.File("m"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Contains("gpt_neox.layers.0.attention.query_key_value.weight", e.Message, StringComparison.Ordinal);
        Assert.Contains("shape [80, 40]", e.Message, StringComparison.Ordinal);
        Assert.Contains("implies [120, 40] (q, k and v of every head, fused)", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_rotary_pct_giving_a_fractional_dimension_is_refused_on_open()
    {
        string folder = SyntheticCheckpoint.Write(NeoX, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(NeoX with { RotaryPct = 0.55 }, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<ModelConfigException>(() => LanguageModel.Open(folder));
        Assert.Equal("rotary_pct", e.Field);
        Assert.Contains("0.55 of heads of width 10 is 5.5 dimensions", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_tensor_of_another_recipe_is_refused()
    {
        // A per-head query norm (a later family's recipe) is not silently ignored.
        var extra = new StoredParameter("model.layers.0.self_attn.q_norm.weight", [10], new float[10]);
        string folder = SyntheticCheckpoint.Write(Llama, SyntheticCheckpoint.Parameters(Llama).Append(extra), _temp.File("m"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Contains("model.layers.0.self_attn.q_norm.weight", e.Message, StringComparison.Ordinal);
        Assert.Contains("not a parameter of the architecture", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_tied_config_with_a_different_stored_head_is_refused()
    {
        CheckpointSpec untied = Llama;
        string folder = SyntheticCheckpoint.Write(untied, _temp.File("m"));
        SyntheticCheckpoint.WriteConfig(untied with { Tied = true }, Path.Combine(folder, "config.json"));
        var e = Assert.Throws<WeightsFormatException>(() => LanguageModel.Open(folder));
        Assert.Contains("lm_head.weight", e.Message, StringComparison.Ordinal);
        Assert.Contains("differs from model.embed_tokens.weight", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Inspect_shows_the_family_recipe_layers_and_memory()
    {
        string folder = Checkpoints.Folder(Llama);
        var o = new StringWriter();
        Assert.Equal(0, InspectCommand.Run(folder, o));
        string text = o.ToString();
        output.WriteLine(text[..Math.Min(text.Length, 1500)]);
        Assert.Contains("architecture  Llama-style (model_type llama): 2 layers, width 60, 6 heads of 10 on 2 key/value heads, MLP 100", text, StringComparison.Ordinal);
        Assert.Contains("recipe        pre-norm RMSNorm in float32 (ε 1e-6); rotary on 10 dims per head (half-split), base 10000; attention 6 heads of 10, 2 key/value heads (groups of 3); gated SiLU MLP 100; no biases; sequential residual; separate head", text, StringComparison.Ordinal);
        Assert.Contains("layers        0 … 2 for hidden:LAYER", text, StringComparison.Ordinal);
        Assert.Contains("2 buffers skipped", text, StringComparison.Ordinal);
        Assert.Contains("check         OK", text, StringComparison.Ordinal);

        var json = new StringWriter();
        Assert.Equal(0, InspectCommand.RunJson(Checkpoints.Folder(NeoX), json));
        using JsonDocument doc = JsonDocument.Parse(json.ToString());
        JsonElement a = doc.RootElement.GetProperty("architecture");
        Assert.Equal("gpt_neox", doc.RootElement.GetProperty("family").GetString());
        Assert.Equal((6, true, "layernorm"), (a.GetProperty("rotary_dims").GetInt32(), a.GetProperty("parallel_residual").GetBoolean(), a.GetProperty("norm").GetString()));
        Assert.Equal(ModelConfig.Load(Path.Combine(Checkpoints.Folder(NeoX), "config.json")).ParameterCount, doc.RootElement.GetProperty("parameters").GetInt64());
    }

    /// <summary>The memory inspect quotes per --weights choice is what opening takes, for each family and storage.</summary>
    [Theory]
    [InlineData("llama-gqa-width60")]
    [InlineData("qwen2-bias-window")]
    [InlineData("neox-parallel-pct06")]
    public void Weight_bytes_estimate_equals_what_opening_takes(string name)
    {
        string folder = Checkpoints.Folder(ForwardParityTests.Families[name]);
        ModelConfig config = ModelConfig.Load(Path.Combine(folder, "config.json"));
        foreach (WeightPrecision p in Enum.GetValues<WeightPrecision>())
        {
            Assert.Equal(LanguageModel.WeightBytesFor(config, p), LanguageModel.Open(folder, p).WeightBytes);
        }
    }

    /// <summary>
    /// int8 block projections (per-column weights, per-row activations) and bfloat16 tables on each family: the
    /// logits stay within 3 % of their range of the float32 model's (drift measured, not exactness: 0.8–2.4 % here).
    /// </summary>
    [Theory]
    [InlineData("llama-gqa-width60")]
    [InlineData("qwen2-bias-window")]
    [InlineData("neox-sequential-bf16")]
    public void Int8_weights_drift_little_on_every_family(string name)
    {
        string folder = Checkpoints.Folder(ForwardParityTests.Families[name]);
        int[][] sequences = ForwardParityTests.RandomSequences([12, 5], 300, seed: 3);
        ForwardResult full = LanguageModel.Open(folder).Forward(sequences);
        ForwardResult int8 = LanguageModel.Open(folder, WeightPrecision.Integer8).Forward(sequences);
        for (int s = 0; s < sequences.Length; s++)
        {
            float[] a = full.LastLogits(s).ToArray(), b = int8.LastLogits(s).ToArray();
            double range = a.Max() - a.Min(), drift = a.Zip(b, (x, y) => Math.Abs(x - y)).Max();
            output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{name} sequence {s}: int8 max |Δlogit| {drift:G3} of range {range:G3}"));
            Assert.True(drift < 0.03 * range, $"{name}: int8 drift {drift} against a logit range of {range}");
        }
    }

    [Fact]
    public void Extract_runs_on_a_llama_checkpoint_and_records_the_family()
    {
        string input = ExtractionRunTests.WriteInput(_temp, 6);
        var request = ExtractCommandTests.Request(input, _temp.File("run"), "hidden:all,nextword,cmean") with { Model = Checkpoints.Folder(Llama) };
        Assert.Equal(0, ExtractCommand.Run(request, TextWriter.Null, TextWriter.Null, CancellationToken.None));
        using JsonDocument record = JsonDocument.Parse(File.ReadAllText(_temp.File("run/record.json")));
        Assert.Equal("llama", record.RootElement.GetProperty("settings").GetProperty("model").GetProperty("family").GetString());
        Assert.Equal(6, RunFeatures.Load(_temp.File("run"), "cmean").Rows);
    }
}
