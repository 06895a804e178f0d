using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;
using Assay.Weights;

namespace Assay.Model.Gpt2;

/// <summary>
/// The GPT-2 checkpoint layout, under one naming layout (with or without the "transformer." prefix); the per-block
/// causal-mask buffers that published GPT-2 files carry (attn.bias, attn.masked_bias) are skipped. Projections are
/// stored [in, out] (GPT-2's Conv1D).
/// </summary>
internal sealed class Gpt2Layout : CheckpointLayout
{
    public static readonly Gpt2Layout Instance = new();

    private const string Prefix = "transformer.";

    protected override string HeadName => "lm_head.weight";

    protected override string EmbeddingName => "wte.weight";

    public override IEnumerable<(string Name, long[] Shape)> ExpectedParameters(ModelConfig c)
    {
        long d = c.Width, m = c.InnerWidth;
        yield return ("wte.weight", [c.VocabularySize, d]);
        yield return ("wpe.weight", [c.ContextLength, d]);
        for (int i = 0; i < c.Layers; i++)
        {
            string b = "h." + Index(i);
            yield return (b + "ln_1.weight", [d]);
            yield return (b + "ln_1.bias", [d]);
            yield return (b + "attn.c_attn.weight", [d, 3 * d]);
            yield return (b + "attn.c_attn.bias", [3 * d]);
            yield return (b + "attn.c_proj.weight", [d, d]);
            yield return (b + "attn.c_proj.bias", [d]);
            yield return (b + "ln_2.weight", [d]);
            yield return (b + "ln_2.bias", [d]);
            yield return (b + "mlp.c_fc.weight", [d, m]);
            yield return (b + "mlp.c_fc.bias", [m]);
            yield return (b + "mlp.c_proj.weight", [m, d]);
            yield return (b + "mlp.c_proj.bias", [d]);
        }
        yield return ("ln_f.weight", [d]);
        yield return ("ln_f.bias", [d]);
        if (!c.TiedHead)
        {
            yield return (HeadName, [c.VocabularySize, d]);
        }
    }

    protected override string NamePrefix(SafetensorsCheckpoint checkpoint) =>
        checkpoint.TryGetTensor(Prefix + "wte.weight", out _) ? Prefix : "";

    protected override bool IsBuffer(string name, string prefix, int layers) =>
        IsBlockTensor(name, prefix + "h.", layers, "attn.bias", "attn.masked_bias");

    public override ModelWeights Load(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath, WeightPrecision precision,
        CancellationToken cancellationToken)
    {
        string prefix = Check(checkpoint, config, configPath).NamePrefix;
        var reader = new TensorReader(checkpoint, prefix, cancellationToken);
        int d = config.Width, m = config.InnerWidth;
        (PackedMatrix tokenEmbedding, OutputHead head) = Tables(reader, checkpoint, config, configPath, prefix, precision);
        var embedding = new Gpt2Embedding(tokenEmbedding, reader.Read("wpe.weight"));
        float epsilon = config.NormEpsilon;
        var blocks = new ITransformerBlock[config.Layers];
        for (int i = 0; i < blocks.Length; i++)
        {
            string b = "h." + Index(i);
            blocks[i] = new Gpt2Block(
                new LayerNormParameters(reader.Read(b + "ln_1.weight"), reader.Read(b + "ln_1.bias"), epsilon),
                reader.Matrix(b + "attn.c_attn.weight", b + "attn.c_attn.bias", d, 3 * d, precision),
                reader.Matrix(b + "attn.c_proj.weight", b + "attn.c_proj.bias", d, d, precision),
                new LayerNormParameters(reader.Read(b + "ln_2.weight"), reader.Read(b + "ln_2.bias"), epsilon),
                reader.Matrix(b + "mlp.c_fc.weight", b + "mlp.c_fc.bias", d, m, precision),
                reader.Matrix(b + "mlp.c_proj.weight", b + "mlp.c_proj.bias", m, d, precision),
                config.Heads, config.Activation);
        }
        var finalNorm = new LayerNormParameters(reader.Read("ln_f.weight"), reader.Read("ln_f.bias"), epsilon);
        return new ModelWeights(embedding, blocks, finalNorm, head, precision,
            headBytes: head.Uses(tokenEmbedding) ? 0 : head.Bytes);
    }

    public override long WeightBytes(ModelConfig config, WeightPrecision precision)
    {
        int d = config.Width, m = config.InnerWidth;
        long block = (2 * 2 * 4L * d)
            + PackedMatrix.BytesFor(d, 3 * d, precision, bias: true) + PackedMatrix.BytesFor(d, d, precision, bias: true)
            + PackedMatrix.BytesFor(d, m, precision, bias: true) + PackedMatrix.BytesFor(m, d, precision, bias: true);
        return TableBytes(config, precision) + (4L * config.ContextLength * d) + (config.Layers * block) + (2 * 4L * d);
    }
}
