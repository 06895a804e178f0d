using Assay.Config;
using Assay.Fixtures;
using Assay.Tests.Support;

namespace Assay.Tests.Config;

public sealed class ModelConfigTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    [Fact]
    public void Gpt2_small_has_the_published_parameter_count()
    {
        // 124,439,808: the published GPT-2 small figure with the tied head counted once.
        string path = _temp.File("config.json");
        SyntheticCheckpoint.WriteConfig(CheckpointSpec.Gpt2Small, path);
        ModelConfig c = ModelConfig.Load(path);
        Assert.Equal(124_439_808L, c.ParameterCount);
        Assert.Equal((768, 12, 12, 1024, 50257, 3072), (c.Width, c.Layers, c.Heads, c.ContextLength, c.VocabularySize, c.InnerWidth));
        Assert.Equal(Activation.GeluTanh, c.Activation);
        Assert.True(c.TiedHead);
        Assert.Equal(1e-5f, c.NormEpsilon);
    }

    [Fact]
    public void Reads_the_published_gpt2_config_text()
    {
        // The field set of the published GPT-2 small config.json (from memory), including fields the engine ignores.
        Write("""
            {"activation_function": "gelu_new", "architectures": ["GPT2LMHeadModel"], "attn_pdrop": 0.1, "bos_token_id": 50256,
             "embd_pdrop": 0.1, "eos_token_id": 50256, "initializer_range": 0.02, "layer_norm_epsilon": 1e-05,
             "model_type": "gpt2", "n_ctx": 1024, "n_embd": 768, "n_head": 12, "n_layer": 12, "n_positions": 1024,
             "resid_pdrop": 0.1, "summary_activation": null, "summary_first_dropout": 0.1, "summary_proj_to_labels": true,
             "summary_type": "cls_index", "summary_use_proj": true, "task_specific_params": {"text-generation": {"do_sample": true, "max_length": 50}},
             "vocab_size": 50257}
            """);
        Assert.Equal(124_439_808L, ModelConfig.Load(_temp.File("config.json")).ParameterCount);
    }

    [Fact]
    public void Untied_head_adds_its_matrix()
    {
        string path = _temp.File("config.json");
        SyntheticCheckpoint.WriteConfig(CheckpointSpec.Gpt2Small with { Tied = false }, path);
        Assert.Equal(124_439_808L + (50257L * 768), ModelConfig.Load(path).ParameterCount);
    }

    [Theory]
    [InlineData("\"n_embd\": 0", "n_embd", "expected an integer in [1")]
    [InlineData("\"n_embd\": 64.5", "n_embd", "expected an integer")]
    [InlineData("\"n_head\": 5", "n_head", "does not divide n_embd = 64")]
    [InlineData("\"layer_norm_epsilon\": 0", "layer_norm_epsilon", "expected a number in (0, 1)")]
    [InlineData("\"activation_function\": \"swish\"", "activation_function", "'swish' is not supported")]
    [InlineData("\"model_type\": \"falcon\"", "model_type", "'falcon' is not supported")]
    [InlineData("\"scale_attn_by_inverse_layer_idx\": true", "scale_attn_by_inverse_layer_idx", "not supported")]
    [InlineData("\"tie_word_embeddings\": \"yes\"", "tie_word_embeddings", "expected true or false")]
    [InlineData("\"vocab_size\": -3", "vocab_size", "expected an integer in [1")]
    public void Refuses_a_value_out_of_range_naming_the_field(string replacement, string field, string fragment)
    {
        string key = replacement[..replacement.IndexOf(':', StringComparison.Ordinal)];
        var fields = new Dictionary<string, string>
        {
            ["\"model_type\""] = "\"gpt2\"", ["\"n_embd\""] = "64", ["\"n_layer\""] = "2", ["\"n_head\""] = "4",
            ["\"n_positions\""] = "32", ["\"vocab_size\""] = "300", ["\"layer_norm_epsilon\""] = "1e-05",
            ["\"activation_function\""] = "\"gelu_new\"",
        };
        fields[key] = replacement[(replacement.IndexOf(':', StringComparison.Ordinal) + 1)..].Trim();
        Write("{" + string.Join(", ", fields.Select(kv => kv.Key + ": " + kv.Value)) + "}");
        var e = Assert.Throws<ModelConfigException>(() => ModelConfig.Load(_temp.File("config.json")));
        Assert.Equal(field, e.Field);
        Assert.Contains(fragment, e.Message, StringComparison.Ordinal);
        Assert.StartsWith(_temp.File("config.json"), e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_missing_size()
    {
        Write("{\"n_embd\": 64, \"n_layer\": 2, \"n_head\": 4, \"vocab_size\": 300, \"layer_norm_epsilon\": 1e-5, \"activation_function\": \"gelu_new\"}");
        var e = Assert.Throws<ModelConfigException>(() => ModelConfig.Load(_temp.File("config.json")));
        Assert.Equal("n_positions", e.Field);
    }

    [Fact]
    public void Refuses_malformed_json()
    {
        Write("{\"n_embd\": 64,");
        var e = Assert.Throws<ModelConfigException>(() => ModelConfig.Load(_temp.File("config.json")));
        Assert.Contains("not well-formed JSON", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_missing_file()
    {
        var e = Assert.Throws<ModelConfigException>(() => ModelConfig.Load(_temp.File("config.json")));
        Assert.Contains("file not found", e.Message, StringComparison.Ordinal);
    }

    private void Write(string json) => File.WriteAllText(_temp.File("config.json"), json);
}
