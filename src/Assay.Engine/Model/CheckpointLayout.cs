using System.Globalization;
using Assay.Config;
using Assay.Kernels;
using Assay.Weights;

namespace Assay.Model;

/// <summary>
/// How one family's checkpoints name and shape their tensors, and how they become the forward pass's packed
/// weights. Every parameter the config implies must be present with its shape and a floating dtype; the family's
/// known non-parameter buffers are skipped; any other tensor is an error rather than silently ignored.
/// </summary>
internal abstract class CheckpointLayout
{
    /// <summary>The layout of <paramref name="config"/>'s family.</summary>
    public static CheckpointLayout For(ModelConfig config) => config.Family switch
    {
        ModelFamily.Gpt2 => Gpt2.Gpt2Layout.Instance,
        ModelFamily.GptNeoX => NeoX.NeoXLayout.Instance,
        _ => Llama.LlamaLayout.Instance,
    };

    /// <summary>The output head's tensor name, as stored.</summary>
    protected abstract string HeadName { get; }

    /// <summary>The token embedding's tensor name, without the optional prefix.</summary>
    protected abstract string EmbeddingName { get; }

    /// <summary>Every parameter name (without the optional prefix) and shape the config implies, in checkpoint order;
    /// the head only when untied.</summary>
    public abstract IEnumerable<(string Name, long[] Shape)> ExpectedParameters(ModelConfig c);

    /// <summary>Converts and packs every parameter (after <see cref="Check"/>); throws on the first bad value.</summary>
    public abstract ModelWeights Load(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath, WeightPrecision precision,
        CancellationToken cancellationToken);

    /// <summary>The bytes <see cref="Load"/> gives a model of this config in <paramref name="precision"/> (its <see cref="ModelWeights.Bytes"/>), without loading it.</summary>
    public abstract long WeightBytes(ModelConfig config, WeightPrecision precision);

    /// <summary>The prefix the checkpoint's names carry ("" unless the family has an optional one).</summary>
    protected virtual string NamePrefix(SafetensorsCheckpoint checkpoint) => "";

    /// <summary>Whether a stored tensor that is no parameter is one of the family's known buffers (causal masks, rotary tables).</summary>
    protected abstract bool IsBuffer(string name, string prefix, int layers);

    /// <summary>
    /// Validates names, shapes and dtypes of the whole checkpoint before anything is converted; see
    /// <see cref="LanguageModel.CheckCheckpoint"/>.
    /// </summary>
    public CheckpointSummary Check(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath)
    {
        string prefix = NamePrefix(checkpoint);
        var expected = new Dictionary<string, long[]>(StringComparer.Ordinal);
        foreach ((string name, long[] shape) in ExpectedParameters(config))
        {
            expected.Add(name == HeadName ? name : prefix + name, shape);
        }
        if (config.TiedHead && checkpoint.TryGetTensor(HeadName, out _))
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
                    : string.Create(CultureInfo.InvariantCulture, $"; {configPath} implies it ({config.ModelType}, {config.Layers} layers, width {config.Width})");
                throw new WeightsFormatException(where, name, "missing" + hint);
            }
            if (!t.Shape.SequenceEqual(shape))
            {
                throw new WeightsFormatException(t.FilePath, name,
                    $"shape {t.ShapeText}; {configPath} implies {TensorInfo.FormatShape(shape)}{ShapeHint(name, config)}");
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
            else if (IsBuffer(t.Name, prefix, config.Layers))
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

    /// <summary>Why a tensor's shape may differ, in the config's terms (e.g. the key/value head count), or "".</summary>
    protected virtual string ShapeHint(string name, ModelConfig config) => "";

    /// <summary>
    /// The token embedding (packed as Eᵀ, d × V) and the output head: the embedding itself when tied — a stored head must
    /// then equal it, compared in float32 — else the head tensor. int8 is for the block projections; these tables, read by
    /// rows and by the V-wide product, stay in bfloat16.
    /// </summary>
    protected (PackedMatrix Embedding, OutputHead Head) Tables(TensorReader reader, SafetensorsCheckpoint checkpoint, ModelConfig config,
        string configPath, string prefix, WeightPrecision precision)
    {
        int d = config.Width, v = config.VocabularySize;
        WeightPrecision tables = TablePrecision(precision);
        string embeddingName = prefix + EmbeddingName;
        PackedMatrix embedding = reader.Transposed(embeddingName, d, tables);
        PackedMatrix head = embedding;
        if (!config.TiedHead)
        {
            head = reader.Transposed(HeadName, d, tables);
        }
        else if (checkpoint.TryGetTensor(HeadName, out _))
        {
            float[] stored = reader.Scratch(embeddingName).ToArray();
            if (!reader.Scratch(HeadName).SequenceEqual(stored))
            {
                throw new WeightsFormatException(Source(checkpoint, HeadName), HeadName,
                    $"differs from {embeddingName}, but {configPath} says the head is tied (tie_word_embeddings); set it to false to use this head");
            }
        }
        return (embedding, new OutputHead(head));
    }

    /// <summary>The precision of the embedding and head tables for a <paramref name="precision"/> load.</summary>
    protected static WeightPrecision TablePrecision(WeightPrecision precision) =>
        precision == WeightPrecision.Integer8 ? WeightPrecision.BFloat16 : precision;

    /// <summary>Bytes of the embedding table and, when untied, the head.</summary>
    protected static long TableBytes(ModelConfig config, WeightPrecision precision)
    {
        long table = PackedMatrix.BytesFor(config.Width, config.VocabularySize, TablePrecision(precision), bias: false);
        return config.TiedHead ? table : 2 * table;
    }

    /// <summary>The block's index as a name part, "{i}.".</summary>
    protected static string Index(int i) => i.ToString(CultureInfo.InvariantCulture) + ".";

    /// <summary>Whether <paramref name="name"/> is {start}{i}.{leaf} for a block i &lt; <paramref name="layers"/> and one of <paramref name="leaves"/>.</summary>
    protected static bool IsBlockTensor(string name, string start, int layers, params string[] leaves)
    {
        if (!name.StartsWith(start, StringComparison.Ordinal))
        {
            return false;
        }
        ReadOnlySpan<char> rest = name.AsSpan(start.Length);
        int dot = rest.IndexOf('.');
        if (dot <= 0 || !int.TryParse(rest[..dot], NumberStyles.None, CultureInfo.InvariantCulture, out int layer) || layer >= layers
            || rest[..dot].ToString() != layer.ToString(CultureInfo.InvariantCulture))
        {
            return false;
        }
        string leaf = rest[(dot + 1)..].ToString();
        return leaves.Contains(leaf, StringComparer.Ordinal);
    }

    private static string Source(SafetensorsCheckpoint checkpoint, string name) =>
        checkpoint.TryGetTensor(name, out TensorInfo? t) ? t.FilePath : checkpoint.Folder;
}
