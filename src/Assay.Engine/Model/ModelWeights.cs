using System.Globalization;
using Assay.Config;
using Assay.Kernels;
using Assay.Weights;

namespace Assay.Model;

/// <summary>One transformer block's parameters, converted to float32 and packed for the kernels.</summary>
internal sealed record BlockWeights(
    float[] Norm1Gain, float[] Norm1Bias, PackedMatrix Attention, PackedMatrix AttentionOut,
    float[] Norm2Gain, float[] Norm2Bias, PackedMatrix MlpIn, PackedMatrix MlpOut);

/// <summary>
/// Binds a checkpoint's tensors to a <see cref="ModelConfig"/>: every parameter the config implies must be present
/// with its expected shape, under one naming layout (with or without the "transformer." prefix); the per-block
/// causal-mask buffers that published GPT-2 files carry (attn.bias, attn.masked_bias) are skipped; any other tensor
/// is an error rather than silently ignored.
/// </summary>
internal sealed class ModelWeights
{
    private const string Prefix = "transformer.";
    private const string HeadName = "lm_head.weight";

    private ModelWeights(PackedMatrix tokenEmbedding, float[] positionEmbedding, BlockWeights[] blocks,
        float[] finalGain, float[] finalBias, PackedMatrix head, WeightPrecision precision)
    {
        Precision = precision;
        TokenEmbedding = tokenEmbedding;
        PositionEmbedding = positionEmbedding;
        Blocks = blocks;
        FinalNormGain = finalGain;
        FinalNormBias = finalBias;
        Head = head;
    }

    /// <summary>The token embedding E (V × d) packed as Eᵀ (d × V); column v is token v's embedding.</summary>
    public PackedMatrix TokenEmbedding { get; }

    /// <summary>Position embeddings, P × d row-major.</summary>
    public float[] PositionEmbedding { get; }

    public IReadOnlyList<BlockWeights> Blocks { get; }

    public float[] FinalNormGain { get; }

    public float[] FinalNormBias { get; }

    /// <summary>The output head as a d × V packed matrix; the same object as <see cref="TokenEmbedding"/> when tied.</summary>
    public PackedMatrix Head { get; }

    /// <summary>Storage of the packed matrices.</summary>
    public WeightPrecision Precision { get; }

    /// <summary>Bytes every parameter takes in memory, packed (a tied head counted once).</summary>
    public long Bytes
    {
        get
        {
            long bytes = TokenEmbedding.Bytes + (ReferenceEquals(Head, TokenEmbedding) ? 0 : Head.Bytes)
                + (4L * (PositionEmbedding.LongLength + FinalNormGain.LongLength + FinalNormBias.LongLength));
            foreach (BlockWeights b in Blocks)
            {
                bytes += b.Attention.Bytes + b.AttentionOut.Bytes + b.MlpIn.Bytes + b.MlpOut.Bytes
                    + (4L * (b.Norm1Gain.LongLength + b.Norm1Bias.LongLength + b.Norm2Gain.LongLength + b.Norm2Bias.LongLength));
            }
            return bytes;
        }
    }

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

        float[] wpe = reader.Read("wpe.weight");
        var blocks = new BlockWeights[config.Layers];
        for (int i = 0; i < blocks.Length; i++)
        {
            string b = "h." + i.ToString(CultureInfo.InvariantCulture) + ".";
            blocks[i] = new BlockWeights(
                reader.Read(b + "ln_1.weight"), reader.Read(b + "ln_1.bias"),
                reader.Matrix(b + "attn.c_attn.weight", b + "attn.c_attn.bias", d, 3 * d, precision),
                reader.Matrix(b + "attn.c_proj.weight", b + "attn.c_proj.bias", d, d, precision),
                reader.Read(b + "ln_2.weight"), reader.Read(b + "ln_2.bias"),
                reader.Matrix(b + "mlp.c_fc.weight", b + "mlp.c_fc.bias", d, m, precision),
                reader.Matrix(b + "mlp.c_proj.weight", b + "mlp.c_proj.bias", m, d, precision));
        }
        return new ModelWeights(tokenEmbedding, wpe, blocks, reader.Read("ln_f.weight"), reader.Read("ln_f.bias"), head, precision);
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

    /// <summary>
    /// Converts tensors one at a time. The matrices go through one reused scratch buffer (sized for the largest
    /// tensor) straight into their packed form, so loading leaves no float32 copies behind; each tensor's mapped file
    /// pages are released once it is converted.
    /// </summary>
    private sealed class TensorReader(SafetensorsCheckpoint checkpoint, string prefix)
    {
        private float[] _scratch = [];

        /// <summary>A small tensor (norm gains, biases, position embeddings), as its own array.</summary>
        public float[] Read(string name) => Scratch(prefix + name).ToArray();

        /// <summary>A tensor converted into the scratch buffer: valid until the next call.</summary>
        public ReadOnlySpan<float> Scratch(string name)
        {
            checkpoint.TryGetTensor(name, out TensorInfo? t);
            if (_scratch.LongLength < t!.ElementCount)
            {
                _scratch = new float[t.ElementCount];
            }
            Span<float> values = _scratch.AsSpan(0, checked((int)t.ElementCount));
            checkpoint.ReadFloat32(t, values);
            checkpoint.ReleasePages(t);
            int bad = FirstNonFinite(values);
            if (bad >= 0)
            {
                throw new WeightsFormatException(t.FilePath, name,
                    $"element {bad} is {values[bad].ToString(CultureInfo.InvariantCulture)}; parameters must be finite");
            }
            return values;
        }

        /// <summary>A matrix of the block, packed, with its bias.</summary>
        public PackedMatrix Matrix(string name, string biasName, int rows, int columns, WeightPrecision precision)
        {
            float[] bias = Read(biasName);
            return PackedMatrix.FromRowMajor(Scratch(prefix + name), rows, columns, bias, precision);
        }

        private static int FirstNonFinite(ReadOnlySpan<float> values)
        {
            for (int i = 0; i < values.Length; i++)
            {
                if (!float.IsFinite(values[i]))
                {
                    return i;
                }
            }
            return -1;
        }
    }
}
