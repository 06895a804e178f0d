using System.Globalization;
using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;
using Assay.Weights;

namespace Assay.Model.Llama;

/// <summary>
/// The checkpoint layout of the Llama-style families (Llama, Mistral, Qwen2) as published: "model.embed_tokens",
/// "model.layers.{i}" with input_layernorm, self_attn.{q,k,v,o}_proj (q/k/v biases for Qwen2),
/// post_attention_layernorm and mlp.{gate,up,down}_proj, "model.norm", and "lm_head" when untied. Linear layers are
/// stored [out, in]. Older files' per-block rotary tables (self_attn.rotary_emb.inv_freq) are skipped: the engine
/// computes the frequencies from the config.
/// </summary>
internal sealed class LlamaLayout : CheckpointLayout
{
    public static readonly LlamaLayout Instance = new();

    protected override string HeadName => "lm_head.weight";

    protected override string EmbeddingName => "model.embed_tokens.weight";

    public override IEnumerable<(string Name, long[] Shape)> ExpectedParameters(ModelConfig c)
    {
        long d = c.Width, m = c.InnerWidth, q = (long)c.Heads * c.HeadWidth, kv = (long)c.KeyValueHeads * c.HeadWidth;
        bool bias = c.Biases == LinearBiases.QueryKeyValue;
        yield return (EmbeddingName, [c.VocabularySize, d]);
        for (int i = 0; i < c.Layers; i++)
        {
            string b = "model.layers." + Index(i);
            yield return (b + "input_layernorm.weight", [d]);
            yield return (b + "self_attn.q_proj.weight", [q, d]);
            if (bias)
            {
                yield return (b + "self_attn.q_proj.bias", [q]);
            }
            yield return (b + "self_attn.k_proj.weight", [kv, d]);
            if (bias)
            {
                yield return (b + "self_attn.k_proj.bias", [kv]);
            }
            yield return (b + "self_attn.v_proj.weight", [kv, d]);
            if (bias)
            {
                yield return (b + "self_attn.v_proj.bias", [kv]);
            }
            yield return (b + "self_attn.o_proj.weight", [d, q]);
            yield return (b + "post_attention_layernorm.weight", [d]);
            yield return (b + "mlp.gate_proj.weight", [m, d]);
            yield return (b + "mlp.up_proj.weight", [m, d]);
            yield return (b + "mlp.down_proj.weight", [d, m]);
        }
        yield return ("model.norm.weight", [d]);
        if (!c.TiedHead)
        {
            yield return (HeadName, [c.VocabularySize, d]);
        }
    }

    protected override bool IsBuffer(string name, string prefix, int layers) =>
        IsBlockTensor(name, "model.layers.", layers, "self_attn.rotary_emb.inv_freq");

    protected override string ShapeHint(string name, ModelConfig c)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        if (name.Contains(".self_attn.k_proj.", StringComparison.Ordinal) || name.Contains(".self_attn.v_proj.", StringComparison.Ordinal))
        {
            return string.Create(inv, $" (num_key_value_heads {c.KeyValueHeads} × head width {c.HeadWidth})");
        }
        if (name.Contains(".self_attn.", StringComparison.Ordinal))
        {
            return string.Create(inv, $" (num_attention_heads {c.Heads} × head width {c.HeadWidth})");
        }
        return name.Contains(".mlp.", StringComparison.Ordinal) ? string.Create(inv, $" (intermediate_size {c.InnerWidth})") : "";
    }

    public override ModelWeights Load(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath, WeightPrecision precision,
        CancellationToken cancellationToken)
    {
        Check(checkpoint, config, configPath);
        var reader = new TensorReader(checkpoint, "", cancellationToken);
        int d = config.Width, q = config.Heads * config.HeadWidth;
        (PackedMatrix tokens, OutputHead head) = Tables(reader, checkpoint, config, configPath, "", precision);
        var rotary = new RotaryEmbedding(config.Rotary!, config.ContextLength);
        float eps = config.NormEpsilon;
        bool bias = config.Biases == LinearBiases.QueryKeyValue;
        var blocks = new ITransformerBlock[config.Layers];
        for (int i = 0; i < blocks.Length; i++)
        {
            string b = "model.layers." + Index(i);
            string[] qkv = [b + "self_attn.q_proj.weight", b + "self_attn.k_proj.weight", b + "self_attn.v_proj.weight"];
            string[]? qkvBias = bias ? [b + "self_attn.q_proj.bias", b + "self_attn.k_proj.bias", b + "self_attn.v_proj.bias"] : null;
            var shape = new AttentionShape(config.Heads, config.KeyValueHeads, config.HeadWidth, config.IsSlidingLayer(i) ? config.SlidingWindow : 0);
            blocks[i] = new LlamaBlock(
                new RmsNormParameters(reader.Read(b + "input_layernorm.weight"), eps),
                reader.Linear(qkv, qkvBias, d, precision),
                reader.Linear([b + "self_attn.o_proj.weight"], null, q, precision),
                new RmsNormParameters(reader.Read(b + "post_attention_layernorm.weight"), eps),
                reader.Linear([b + "mlp.gate_proj.weight", b + "mlp.up_proj.weight"], null, d, precision),
                reader.Linear([b + "mlp.down_proj.weight"], null, config.InnerWidth, precision),
                shape, rotary);
        }
        var finalNorm = new RmsNormParameters(reader.Read("model.norm.weight"), eps);
        return new ModelWeights(new TokenEmbedding(tokens), blocks, finalNorm, head, precision,
            headBytes: head.Uses(tokens) ? 0 : head.Bytes);
    }

    public override long WeightBytes(ModelConfig config, WeightPrecision precision)
    {
        int d = config.Width, m = config.InnerWidth, q = config.Heads * config.HeadWidth;
        int rowWidth = (config.Heads + (2 * config.KeyValueHeads)) * config.HeadWidth;
        long block = (2 * 4L * d)
            + PackedMatrix.BytesFor(d, rowWidth, precision, bias: config.Biases == LinearBiases.QueryKeyValue)
            + PackedMatrix.BytesFor(q, d, precision, bias: false)
            + PackedMatrix.BytesFor(d, 2 * m, precision, bias: false) + PackedMatrix.BytesFor(m, d, precision, bias: false);
        return TableBytes(config, precision) + (config.Layers * block) + (4L * d);
    }
}
