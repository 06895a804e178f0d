using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;
using Assay.Weights;

namespace Assay.Model.NeoX;

/// <summary>
/// The NeoX checkpoint layout as published (Pythia): "gpt_neox.embed_in", "gpt_neox.layers.{i}" with
/// input_layernorm, post_attention_layernorm, attention.query_key_value (fused, [3d, d], rows per head: the head's q,
/// then k, then v), attention.dense, mlp.dense_h_to_4h and mlp.dense_4h_to_h, all with biases; "gpt_neox.final_layer_norm"
/// and the untied "embed_out". The per-block causal masks and rotary tables of older files (attention.bias,
/// attention.masked_bias, attention.rotary_emb.inv_freq) are skipped.
/// </summary>
internal sealed class NeoXLayout : CheckpointLayout
{
    public static readonly NeoXLayout Instance = new();

    protected override string HeadName => "embed_out.weight";

    protected override string EmbeddingName => "gpt_neox.embed_in.weight";

    public override IEnumerable<(string Name, long[] Shape)> ExpectedParameters(ModelConfig c)
    {
        long d = c.Width, m = c.InnerWidth;
        yield return (EmbeddingName, [c.VocabularySize, d]);
        for (int i = 0; i < c.Layers; i++)
        {
            string b = "gpt_neox.layers." + Index(i);
            yield return (b + "input_layernorm.weight", [d]);
            yield return (b + "input_layernorm.bias", [d]);
            yield return (b + "post_attention_layernorm.weight", [d]);
            yield return (b + "post_attention_layernorm.bias", [d]);
            yield return (b + "attention.query_key_value.weight", [3 * d, d]);
            yield return (b + "attention.query_key_value.bias", [3 * d]);
            yield return (b + "attention.dense.weight", [d, d]);
            yield return (b + "attention.dense.bias", [d]);
            yield return (b + "mlp.dense_h_to_4h.weight", [m, d]);
            yield return (b + "mlp.dense_h_to_4h.bias", [m]);
            yield return (b + "mlp.dense_4h_to_h.weight", [d, m]);
            yield return (b + "mlp.dense_4h_to_h.bias", [d]);
        }
        yield return ("gpt_neox.final_layer_norm.weight", [d]);
        yield return ("gpt_neox.final_layer_norm.bias", [d]);
        if (!c.TiedHead)
        {
            yield return (HeadName, [c.VocabularySize, d]);
        }
    }

    protected override bool IsBuffer(string name, string prefix, int layers) =>
        IsBlockTensor(name, "gpt_neox.layers.", layers, "attention.bias", "attention.masked_bias", "attention.rotary_emb.inv_freq");

    protected override string ShapeHint(string name, ModelConfig c) =>
        name.EndsWith(".attention.query_key_value.weight", StringComparison.Ordinal) ? " (q, k and v of every head, fused)"
        : name.Contains(".mlp.", StringComparison.Ordinal) ? $" (intermediate_size {c.InnerWidth})" : "";

    public override ModelWeights Load(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath, WeightPrecision precision,
        CancellationToken cancellationToken)
    {
        Check(checkpoint, config, configPath);
        var reader = new TensorReader(checkpoint, "", cancellationToken);
        int d = config.Width, m = config.InnerWidth;
        (PackedMatrix tokens, OutputHead head) = Tables(reader, checkpoint, config, configPath, "", precision);
        var rotary = new RotaryEmbedding(config.Rotary!, config.ContextLength);
        var shape = new AttentionShape(config.Heads, config.Heads, config.HeadWidth, Window: 0);
        float eps = config.NormEpsilon;
        var blocks = new ITransformerBlock[config.Layers];
        for (int i = 0; i < blocks.Length; i++)
        {
            string b = "gpt_neox.layers." + Index(i);
            float[] qkv = Deinterleave(reader.Read(b + "attention.query_key_value.weight"), config.Heads, config.HeadWidth, d);
            float[] qkvBias = Deinterleave(reader.Read(b + "attention.query_key_value.bias"), config.Heads, config.HeadWidth, 1);
            blocks[i] = new NeoXBlock(
                new LayerNormParameters(reader.Read(b + "input_layernorm.weight"), reader.Read(b + "input_layernorm.bias"), eps),
                PackedMatrix.FromTransposed(qkv, d, 3 * d, qkvBias, precision),
                reader.Linear([b + "attention.dense.weight"], [b + "attention.dense.bias"], d, precision),
                new LayerNormParameters(reader.Read(b + "post_attention_layernorm.weight"), reader.Read(b + "post_attention_layernorm.bias"), eps),
                reader.Linear([b + "mlp.dense_h_to_4h.weight"], [b + "mlp.dense_h_to_4h.bias"], d, precision),
                reader.Linear([b + "mlp.dense_4h_to_h.weight"], [b + "mlp.dense_4h_to_h.bias"], m, precision),
                shape, rotary, config.Activation, config.ParallelResidual);
        }
        var finalNorm = new LayerNormParameters(reader.Read("gpt_neox.final_layer_norm.weight"), reader.Read("gpt_neox.final_layer_norm.bias"), eps);
        return new ModelWeights(new TokenEmbedding(tokens), blocks, finalNorm, head, precision,
            headBytes: head.Uses(tokens) ? 0 : head.Bytes);
    }

    /// <summary>
    /// The fused q/k/v rows reordered from the checkpoint's per-head layout (head h's rows: q, k, v, each hd rows of
    /// <paramref name="rowLength"/>) into [q of every head | k | v], the layout the attention kernel reads.
    /// </summary>
    internal static float[] Deinterleave(float[] fused, int heads, int headWidth, int rowLength)
    {
        float[] result = new float[fused.Length];
        int d = heads * headWidth;
        for (int h = 0; h < heads; h++)
        {
            for (int part = 0; part < 3; part++)
            {
                int from = ((h * 3) + part) * headWidth, to = (part * d) + (h * headWidth);
                fused.AsSpan(from * rowLength, headWidth * rowLength).CopyTo(result.AsSpan(to * rowLength));
            }
        }
        return result;
    }

    public override long WeightBytes(ModelConfig config, WeightPrecision precision)
    {
        int d = config.Width, m = config.InnerWidth;
        long block = (2 * 2 * 4L * d)
            + PackedMatrix.BytesFor(d, 3 * d, precision, bias: true) + PackedMatrix.BytesFor(d, d, precision, bias: true)
            + PackedMatrix.BytesFor(d, m, precision, bias: true) + PackedMatrix.BytesFor(m, d, precision, bias: true);
        return TableBytes(config, precision) + (config.Layers * block) + (2 * 4L * d);
    }
}
