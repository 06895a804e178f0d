using System.Globalization;
using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;
using Assay.Weights;

namespace Assay.Model.Gpt2;

/// <summary>
/// The GPT-2 checkpoint layout: binds a checkpoint's tensors to a <see cref="ModelConfig"/>. Every parameter the
/// config implies must be present with its expected shape, under one naming layout (with or without the
/// "transformer." prefix); the per-block causal-mask buffers that published GPT-2 files carry (attn.bias,
/// attn.masked_bias) are skipped; any other tensor is an error rather than silently ignored.
/// </summary>
internal static class Gpt2Layout
{
    private const string Prefix = "transformer.";
    private const string HeadName = "lm_head.weight";

    /// <summary>Every parameter name and shape the config implies, without prefix, in checkpoint order.</summary>
    public static IEnumerable<(string Name, long[] Shape)> ExpectedParameters(ModelConfig c)
    {
        long d = c.Width, m = c.InnerWidth;
        yield return ("wte.weight", [c.VocabularySize, d]);
        yield return ("wpe.weight", [c.ContextLength, d]);
        for (int i = 0; i < c.Layers; i++)
        {
            string b = "h." + i.ToString(CultureInfo.InvariantCulture) + ".";
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
    }

    /// <summary>Checks the checkpoint against the config and converts every parameter; throws on the first mismatch.</summary>
    public static ModelWeights Load(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath, WeightPrecision precision)
    {
        string prefix = Check(checkpoint, config, configPath).NamePrefix;
        var reader = new TensorReader(checkpoint, prefix);
        int d = config.Width, m = config.InnerWidth, v = config.VocabularySize;
        // int8 is for the block projections; the embedding (read by rows) and the head stay in bfloat16.
        WeightPrecision tables = precision == WeightPrecision.Integer8 ? WeightPrecision.BFloat16 : precision;

        PackedMatrix tokenEmbedding = PackedMatrix.FromTransposed(reader.Scratch(prefix + "wte.weight"), d, v, tables);
        PackedMatrix head = tokenEmbedding;
        if (!config.TiedHead)
        {
            head = PackedMatrix.FromTransposed(reader.Scratch(HeadName), d, v, tables);
        }
        else if (checkpoint.TryGetTensor(HeadName, out _))
        {
            // A tied checkpoint may store the head as well; it must then be the embedding itself (compared in float32).
            float[] wte = reader.Scratch(prefix + "wte.weight").ToArray();
            if (!reader.Scratch(HeadName).SequenceEqual(wte))
            {
                throw new WeightsFormatException(Source(checkpoint, HeadName), HeadName,
                    $"differs from {prefix}wte.weight, but {configPath} says the head is tied (tie_word_embeddings); set it to false to use this head");
            }
        }

        var embedding = new Gpt2Embedding(tokenEmbedding, reader.Read("wpe.weight"));
        float epsilon = config.NormEpsilon;
        var blocks = new ITransformerBlock[config.Layers];
        for (int i = 0; i < blocks.Length; i++)
        {
            string b = "h." + i.ToString(CultureInfo.InvariantCulture) + ".";
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
        var outputHead = new OutputHead(head);
        return new ModelWeights(embedding, blocks, finalNorm, outputHead, precision,
            headBytes: outputHead.Uses(tokenEmbedding) ? 0 : outputHead.Bytes);
    }

    /// <summary>The bytes <see cref="Load"/> gives a model of this config in <paramref name="precision"/> (its <see cref="ModelWeights.Bytes"/>), without loading it.</summary>
    public static long WeightBytes(ModelConfig config, WeightPrecision precision)
    {
        int d = config.Width, m = config.InnerWidth, v = config.VocabularySize;
        WeightPrecision tables = precision == WeightPrecision.Integer8 ? WeightPrecision.BFloat16 : precision;
        long table = PackedMatrix.BytesFor(d, v, tables, bias: false);
        long block = (2 * 2 * 4L * d)
            + PackedMatrix.BytesFor(d, 3 * d, precision, bias: true) + PackedMatrix.BytesFor(d, d, precision, bias: true)
            + PackedMatrix.BytesFor(d, m, precision, bias: true) + PackedMatrix.BytesFor(m, d, precision, bias: true);
        return table + (4L * config.ContextLength * d) + (config.Layers * block) + (2 * 4L * d) + (config.TiedHead ? 0 : table);
    }

    /// <summary>
    /// Validates names, shapes and dtypes of the whole checkpoint before anything is converted; see
    /// <see cref="LanguageModel.CheckCheckpoint"/>.
    /// </summary>
    public static CheckpointSummary Check(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath)
    {
        string prefix = checkpoint.TryGetTensor(Prefix + "wte.weight", out _) ? Prefix : "";
        var expected = new Dictionary<string, long[]>(StringComparer.Ordinal);
        foreach ((string name, long[] shape) in ExpectedParameters(config))
        {
            expected.Add(prefix + name, shape);
        }
        bool headStored = checkpoint.TryGetTensor(HeadName, out _);
        if (!config.TiedHead || headStored)
        {
            expected.Add(HeadName, [config.VocabularySize, config.Width]);
        }

        foreach ((string name, long[] shape) in expected)
        {
            if (!checkpoint.TryGetTensor(name, out TensorInfo? t))
            {
                string where = checkpoint.IndexPath ?? checkpoint.Files[0].FilePath;
                string hint = name == HeadName
                    ? $"; {configPath} says the head is untied (tie_word_embeddings false)"
                    : $"; {configPath} implies it (n_layer {config.Layers}, n_embd {config.Width})";
                throw new WeightsFormatException(where, name, "missing" + hint);
            }
            if (!t.Shape.SequenceEqual(shape))
            {
                throw new WeightsFormatException(t.FilePath, name,
                    $"shape {t.ShapeText}; {configPath} implies {TensorInfo.FormatShape(shape)}");
            }
            if (!t.DType.IsParameterType())
            {
                throw new WeightsFormatException(t.FilePath, name,
                    $"dtype {t.DType.Name()}; parameters must be F32, F16 or BF16");
            }
        }

        long values = 0;
        int buffers = 0;
        foreach (TensorInfo t in checkpoint.Tensors)
        {
            if (expected.ContainsKey(t.Name))
            {
                // A tied head stored as well is the embedding again, not more parameters.
                values += config.TiedHead && t.Name == HeadName ? 0 : t.ElementCount;
            }
            else if (IsMaskBuffer(t.Name, prefix, config.Layers))
            {
                buffers++;
            }
            else
            {
                throw new WeightsFormatException(t.FilePath, t.Name,
                    $"not a parameter of the architecture in {configPath} (and not a known buffer); the checkpoint and the config do not match");
            }
        }
        return new CheckpointSummary(prefix, values, buffers);
    }

    /// <summary>The causal-mask buffers h.{i}.attn.bias and h.{i}.attn.masked_bias: stored, but not parameters.</summary>
    private static bool IsMaskBuffer(string name, string prefix, int layers)
    {
        if (!name.StartsWith(prefix + "h.", StringComparison.Ordinal))
        {
            return false;
        }
        ReadOnlySpan<char> rest = name.AsSpan(prefix.Length + 2);
        int dot = rest.IndexOf('.');
        if (dot <= 0 || !int.TryParse(rest[..dot], NumberStyles.None, CultureInfo.InvariantCulture, out int layer) || layer >= layers
            || rest[..dot].ToString() != layer.ToString(CultureInfo.InvariantCulture))
        {
            return false;
        }
        ReadOnlySpan<char> leaf = rest[(dot + 1)..];
        return leaf.SequenceEqual("attn.bias") || leaf.SequenceEqual("attn.masked_bias");
    }

    private static string Source(SafetensorsCheckpoint checkpoint, string name) =>
        checkpoint.TryGetTensor(name, out TensorInfo? t) ? t.FilePath : checkpoint.Folder;
}
