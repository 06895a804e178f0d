using Assay.Config;
using Assay.Tests.Support;

namespace Assay.Tests.Config;

/// <summary>The configs of the Llama-style and NeoX families: published shapes and parameter counts, and refusals that name the field.</summary>
public sealed class FamilyConfigTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    public static TheoryData<string, long> Published()
    {
        var data = new TheoryData<string, long>();
        foreach ((string entry, _, long parameters) in PublishedConfigs.All)
        {
            data.Add(entry, parameters);
        }
        return data;
    }

    /// <summary>Parameter counts computed from published configs against the figures quoted for them (values from memory).</summary>
    [Theory]
    [MemberData(nameof(Published))]
    public void Published_configs_have_their_published_parameter_counts(string entry, long parameters)
    {
        ModelConfig c = Load(PublishedConfigs.All.Single(p => p.Entry == entry).Json);
        Assert.Equal(parameters, c.ParameterCount);
    }

    [Fact]
    public void Reads_each_family_recipe()
    {
        ModelConfig llama3 = Load(PublishedConfigs.Llama32_1B);
        Assert.Equal((ModelFamily.Llama, 32, 8, 64, NormKind.RmsNorm, true, LinearBiases.None, true), (llama3.Family, llama3.Heads, llama3.KeyValueHeads, llama3.HeadWidth, llama3.Norm, llama3.GatedMlp, llama3.Biases, llama3.TiedHead));
        Assert.Equal(new RotaryPositions(64, 500000, RotaryScalingKind.Llama3, 32, 1, 4, 8192), llama3.Rotary);
        Assert.Equal(1e-5f, llama3.NormEpsilon);

        ModelConfig qwen = Load(PublishedConfigs.Qwen25_05B);
        Assert.Equal((ModelFamily.Qwen2, LinearBiases.QueryKeyValue, 0), (qwen.Family, qwen.Biases, qwen.SlidingWindow));

        ModelConfig mistral = Load(PublishedConfigs.Mistral7B);
        Assert.Equal((4096, 0, false), (mistral.SlidingWindow, mistral.SlidingWindowFromLayer, mistral.TiedHead));
        Assert.True(mistral.IsSlidingLayer(0));

        ModelConfig pythia = Load(PublishedConfigs.Pythia160M);
        Assert.Equal((ModelFamily.GptNeoX, NormKind.LayerNorm, Activation.GeluErf, true, LinearBiases.All, false),
            (pythia.Family, pythia.Norm, pythia.Activation, pythia.ParallelResidual, pythia.Biases, pythia.TiedHead));
        Assert.Equal(new RotaryPositions(16, 10000), pythia.Rotary);
        Assert.Contains("rotary on 16 dims per head", pythia.Recipe, StringComparison.Ordinal);
        Assert.Contains("parallel residual", pythia.Recipe, StringComparison.Ordinal);
    }

    [Fact]
    public void A_qwen2_window_starts_at_max_window_layers()
    {
        ModelConfig c = Load(PublishedConfigs.Qwen25_05B.Replace("\"use_sliding_window\": false", "\"use_sliding_window\": true", StringComparison.Ordinal)
            .Replace("\"max_window_layers\": 24", "\"max_window_layers\": 20", StringComparison.Ordinal)
            .Replace("\"sliding_window\": 32768", "\"sliding_window\": 4096", StringComparison.Ordinal));
        Assert.Equal((4096, 20), (c.SlidingWindow, c.SlidingWindowFromLayer));
        Assert.False(c.IsSlidingLayer(19));
        Assert.True(c.IsSlidingLayer(20));
    }

    [Theory]
    [InlineData("\"num_key_value_heads\": 8", "\"num_key_value_heads\": 5", "num_key_value_heads", "5 does not divide num_attention_heads = 32")]
    [InlineData("\"hidden_act\": \"silu\"", "\"hidden_act\": \"gelu\"", "hidden_act", "'gelu' is not supported")]
    [InlineData("\"rope_type\": \"llama3\"", "\"rope_type\": \"yarn\"", "rope_scaling.rope_type", "'yarn' is not supported")]
    [InlineData("\"low_freq_factor\": 1.0, ", "", "rope_scaling.low_freq_factor", "missing")]
    [InlineData("\"attention_bias\": false", "\"attention_bias\": true", "attention_bias", "true is not supported")]
    [InlineData("\"mlp_bias\": false", "\"mlp_bias\": true", "mlp_bias", "true is not supported")]
    [InlineData("\"head_dim\": 64", "\"head_dim\": 63", "head_dim", "need an even head width")]
    [InlineData("\"model_type\": \"llama\"", "\"model_type\": \"gemma\"", "model_type", "'gemma' is not supported")]
    [InlineData("\"rms_norm_eps\": 1e-05", "\"rms_norm_eps\": 0", "rms_norm_eps", "expected a number in (0, 1)")]
    public void Refuses_an_unsupported_llama_value_naming_the_field(string from, string to, string field, string fragment) =>
        AssertRefused(PublishedConfigs.Llama32_1B, from, to, field, fragment);

    [Theory]
    [InlineData("\"rotary_pct\": 0.25", "\"rotary_pct\": 0.3", "rotary_pct", "is 19.2 dimensions")]
    [InlineData("\"rotary_pct\": 0.25", "\"rotary_pct\": 0.015625", "rotary_pct", "is 1 dimensions; expected a whole, even")]
    [InlineData("\"rotary_pct\": 0.25,", "", "rotary_pct", "missing")]
    [InlineData("\"hidden_act\": \"gelu\"", "\"hidden_act\": \"swiglu\"", "hidden_act", "'swiglu' is not supported")]
    [InlineData("\"num_attention_heads\": 12", "\"num_attention_heads\": 10", "num_attention_heads", "does not divide hidden_size = 768")]
    [InlineData("\"use_cache\": true", "\"rope_scaling\": {\"type\": \"linear\", \"factor\": 2.0}", "rope_scaling", "not supported for gpt_neox")]
    public void Refuses_an_unsupported_neox_value_naming_the_field(string from, string to, string field, string fragment) =>
        AssertRefused(PublishedConfigs.Pythia160M, from, to, field, fragment);

    [Fact]
    public void Refuses_a_fractional_rotary_dimension_on_odd_heads()
    {
        // Heads of 10 with rotary_pct 0.25: 2.5 dimensions.
        AssertRefused(PublishedConfigs.Pythia160M.Replace("\"hidden_size\": 768", "\"hidden_size\": 120", StringComparison.Ordinal),
            "\"intermediate_size\": 3072", "\"intermediate_size\": 480", "rotary_pct", "is 2.5 dimensions");
    }

    [Theory]
    [InlineData("\"use_sliding_window\": false", "\"use_sliding_window\": true, \"layer_types\": null", "max_window_layers", null)]
    [InlineData("\"max_window_layers\": 24", "\"max_window_layers\": 24, \"layer_types\": [\"sliding_attention\"]", "layer_types", "expected a list of 24 entries")]
    public void Refuses_an_inconsistent_qwen2_window(string from, string to, string field, string? fragment)
    {
        string json = PublishedConfigs.Qwen25_05B.Replace("\"max_window_layers\": 24, ", "", StringComparison.Ordinal);
        if (field == "layer_types")
        {
            json = PublishedConfigs.Qwen25_05B;
        }
        AssertRefused(json, from, to, field, fragment ?? "missing");
    }

    private void AssertRefused(string json, string from, string to, string field, string fragment)
    {
        Assert.Contains(from, json, StringComparison.Ordinal);
        string path = _temp.File("config.json");
        File.WriteAllText(path, json.Replace(from, to, StringComparison.Ordinal));
        var e = Assert.Throws<ModelConfigException>(() => ModelConfig.Load(path));
        Assert.Equal(field, e.Field);
        Assert.Contains(fragment, e.Message, StringComparison.Ordinal);
        Assert.StartsWith(path, e.Message, StringComparison.Ordinal);
    }

    private ModelConfig Load(string json)
    {
        string path = _temp.File("config.json");
        File.WriteAllText(path, json);
        return ModelConfig.Load(path);
    }
}
