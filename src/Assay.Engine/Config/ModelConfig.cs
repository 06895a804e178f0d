using System.Globalization;
using System.Text.Json;

namespace Assay.Config;

/// <summary>
/// The architecture of a GPT-2-family model, read from its config.json: a decoder-only transformer with learned
/// position embeddings, pre-norm blocks (LayerNorm → causal multi-head attention → residual, LayerNorm → MLP →
/// residual) and a final LayerNorm.
/// </summary>
public sealed record ModelConfig
{
    /// <summary>The file name the config is read from.</summary>
    public const string FileName = "config.json";

    /// <summary>Hidden width d (config "n_embd").</summary>
    public required int Width { get; init; }

    /// <summary>Number of transformer blocks L (config "n_layer").</summary>
    public required int Layers { get; init; }

    /// <summary>Attention heads per block (config "n_head"); divides <see cref="Width"/>.</summary>
    public required int Heads { get; init; }

    /// <summary>Learned positions, the longest sequence the model takes (config "n_positions").</summary>
    public required int ContextLength { get; init; }

    /// <summary>Vocabulary size V (config "vocab_size").</summary>
    public required int VocabularySize { get; init; }

    /// <summary>MLP inner width (config "n_inner"; 4·d when null or absent).</summary>
    public required int InnerWidth { get; init; }

    /// <summary>LayerNorm epsilon (config "layer_norm_epsilon").</summary>
    public required float NormEpsilon { get; init; }

    /// <summary>MLP activation (config "activation_function").</summary>
    public required Activation Activation { get; init; }

    /// <summary>True when the output head is the token-embedding matrix (config "tie_word_embeddings"; true when absent,
    /// as in published GPT-2 configs).</summary>
    public required bool TiedHead { get; init; }

    /// <summary>Width of one attention head, d / heads.</summary>
    public int HeadWidth => Width / Heads;

    /// <summary>
    /// Parameters of the model, counting a tied head once: embeddings V·d + P·d; per block two LayerNorms (4d),
    /// attention d·3d + 3d + d·d + d, MLP d·m + m + m·d + d; final LayerNorm 2d; an untied head adds V·d.
    /// </summary>
    public long ParameterCount
    {
        get
        {
            long d = Width, m = InnerWidth;
            long perBlock = 4 * d + (d * 3 * d + 3 * d) + (d * d + d) + (d * m + m) + (m * d + d);
            long total = ((long)VocabularySize * d) + ((long)ContextLength * d) + (Layers * perBlock) + (2 * d);
            return TiedHead ? total : total + ((long)VocabularySize * d);
        }
    }

    /// <summary>Reads and validates a config.json.</summary>
    /// <exception cref="ModelConfigException">The file is malformed, names another architecture, or holds a value
    /// out of range or unsupported.</exception>
    public static ModelConfig Load(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        if (!File.Exists(path))
        {
            throw new ModelConfigException(path, null, "file not found; a model folder needs a config.json");
        }
        JsonDocument doc = JsonInput.TryParse(InputFile.ReadAllBytes(path), maxDepth: 32, out string problem)
            ?? throw new ModelConfigException(path, null, problem);
        using (doc)
        {
            return Parse(path, doc.RootElement);
        }
    }

    /// <summary>Validates a config object read from <paramref name="path"/> (a config.json, or a manifest entry's architecture).</summary>
    internal static ModelConfig Parse(string path, JsonElement root)
    {
        if (root.ValueKind != JsonValueKind.Object)
        {
            throw new ModelConfigException(path, null, $"expected a JSON object; found {root.ValueKind}");
        }

        string? modelType = OptionalString(path, root, "model_type");
        if (modelType is not null && modelType != "gpt2")
        {
            throw new ModelConfigException(path, "model_type",
                $"'{modelType}' is not supported; this engine runs GPT-2-family models (model_type \"gpt2\")");
        }

        int width = RequiredInt(path, root, "n_embd", 1, 1 << 16);
        int layers = RequiredInt(path, root, "n_layer", 1, 1024);
        int heads = RequiredInt(path, root, "n_head", 1, width);
        if (width % heads != 0)
        {
            throw new ModelConfigException(path, "n_head", $"{heads} does not divide n_embd = {width}");
        }
        int positions = RequiredInt(path, root, "n_positions", 1, 1 << 20);
        int vocab = RequiredInt(path, root, "vocab_size", 1, 1 << 24);
        int inner = root.TryGetProperty("n_inner", out JsonElement innerEl) && innerEl.ValueKind != JsonValueKind.Null
            ? RequiredInt(path, root, "n_inner", 1, 1 << 20)
            : checked(4 * width);

        if (!root.TryGetProperty("layer_norm_epsilon", out JsonElement epsEl))
        {
            throw new ModelConfigException(path, "layer_norm_epsilon", "missing; expected a number such as 1e-05");
        }
        if (epsEl.ValueKind != JsonValueKind.Number || !epsEl.TryGetDouble(out double eps) || !(eps > 0 && eps < 1))
        {
            throw new ModelConfigException(path, "layer_norm_epsilon", $"{Echo.Of(epsEl.GetRawText())}; expected a number in (0, 1)");
        }

        string activationName = OptionalString(path, root, "activation_function")
            ?? throw new ModelConfigException(path, "activation_function", "missing; expected e.g. \"gelu_new\"");
        Activation activation = activationName switch
        {
            "gelu_new" or "gelu_pytorch_tanh" or "gelu_fast" => Activation.GeluTanh,
            "gelu" => Activation.GeluErf,
            "relu" => Activation.Relu,
            _ => throw new ModelConfigException(path, "activation_function",
                $"'{activationName}' is not supported; expected gelu_new, gelu_pytorch_tanh, gelu_fast, gelu or relu"),
        };

        bool tied = OptionalBool(path, root, "tie_word_embeddings") ?? true;

        // Variants of the architecture this engine does not implement are refused rather than run wrongly.
        RequireIfPresent(path, root, "scale_attn_weights", true);
        RequireIfPresent(path, root, "scale_attn_by_inverse_layer_idx", false);
        RequireIfPresent(path, root, "add_cross_attention", false);

        return new ModelConfig
        {
            Width = width,
            Layers = layers,
            Heads = heads,
            ContextLength = positions,
            VocabularySize = vocab,
            InnerWidth = inner,
            NormEpsilon = (float)eps,
            Activation = activation,
            TiedHead = tied,
        };
    }

    private static int RequiredInt(string path, JsonElement root, string field, int min, int max)
    {
        if (!root.TryGetProperty(field, out JsonElement el))
        {
            throw new ModelConfigException(path, field, "missing; expected an integer");
        }
        if (el.ValueKind != JsonValueKind.Number || !el.TryGetInt64(out long v) || v < min || v > max)
        {
            throw new ModelConfigException(path, field,
                $"{Echo.Of(el.GetRawText())}; expected an integer in [{min.ToString(CultureInfo.InvariantCulture)}, {max.ToString(CultureInfo.InvariantCulture)}]");
        }
        return (int)v;
    }

    private static string? OptionalString(string path, JsonElement root, string field)
    {
        if (!root.TryGetProperty(field, out JsonElement el) || el.ValueKind == JsonValueKind.Null)
        {
            return null;
        }
        return el.ValueKind == JsonValueKind.String
            ? el.GetString()
            : throw new ModelConfigException(path, field, $"{Echo.Of(el.GetRawText())}; expected a string");
    }

    private static bool? OptionalBool(string path, JsonElement root, string field)
    {
        if (!root.TryGetProperty(field, out JsonElement el) || el.ValueKind == JsonValueKind.Null)
        {
            return null;
        }
        return el.ValueKind switch
        {
            JsonValueKind.True => true,
            JsonValueKind.False => false,
            _ => throw new ModelConfigException(path, field, $"{Echo.Of(el.GetRawText())}; expected true or false"),
        };
    }

    private static void RequireIfPresent(string path, JsonElement root, string field, bool supported)
    {
        bool? value = OptionalBool(path, root, field);
        if (value is bool v && v != supported)
        {
            throw new ModelConfigException(path, field,
                $"{(v ? "true" : "false")} is not supported; this engine implements only {(supported ? "true" : "false")}");
        }
    }
}
