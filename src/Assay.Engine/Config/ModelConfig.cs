using System.Globalization;
using System.Text.Json;

namespace Assay.Config;

/// <summary>
/// The architecture of a decoder-only transformer, read from its config.json: token embeddings (plus learned
/// positions in GPT-2), pre-norm blocks (norm → causal self-attention, norm → MLP, each added to the residual stream,
/// one after the other or in parallel), a final norm and an output head. The family ("model_type") fixes the recipe;
/// the fields fix the shapes. A value this engine does not implement is refused with the field named, never run wrongly.
/// </summary>
public sealed partial record ModelConfig
{
    /// <summary>The file name the config is read from.</summary>
    public const string FileName = "config.json";

    /// <summary>The family (config "model_type").</summary>
    public required ModelFamily Family { get; init; }

    /// <summary>Hidden width d (config "n_embd" or "hidden_size").</summary>
    public required int Width { get; init; }

    /// <summary>Number of transformer blocks L (config "n_layer" or "num_hidden_layers").</summary>
    public required int Layers { get; init; }

    /// <summary>Query heads per block (config "n_head" or "num_attention_heads").</summary>
    public required int Heads { get; init; }

    /// <summary>Key/value heads per block (config "num_key_value_heads"; the query heads when absent); divides
    /// <see cref="Heads"/>, each key/value head serving Heads / KeyValueHeads query heads.</summary>
    public required int KeyValueHeads { get; init; }

    /// <summary>Width of one attention head (config "head_dim" where given, else d / heads).</summary>
    public required int HeadWidth { get; init; }

    /// <summary>The longest sequence the model takes (config "n_positions" or "max_position_embeddings").</summary>
    public required int ContextLength { get; init; }

    /// <summary>Vocabulary size V (config "vocab_size").</summary>
    public required int VocabularySize { get; init; }

    /// <summary>MLP inner width m (config "n_inner", 4·d when absent, or "intermediate_size").</summary>
    public required int InnerWidth { get; init; }

    /// <summary>The norm of the blocks and the final norm.</summary>
    public required NormKind Norm { get; init; }

    /// <summary>Norm epsilon (config "layer_norm_epsilon", "layer_norm_eps" or "rms_norm_eps").</summary>
    public required float NormEpsilon { get; init; }

    /// <summary>MLP activation (config "activation_function" or "hidden_act").</summary>
    public required Activation Activation { get; init; }

    /// <summary>True for a gated MLP, down(act(gate(x)) ⊙ up(x)); false for down(act(up(x))).</summary>
    public required bool GatedMlp { get; init; }

    /// <summary>Which linear layers carry a bias.</summary>
    public required LinearBiases Biases { get; init; }

    /// <summary>Rotary positions, or null for learned position embeddings (GPT-2).</summary>
    public required RotaryPositions? Rotary { get; init; }

    /// <summary>True when a block adds attention and MLP, both computed from the block's input, in one step
    /// (NeoX "use_parallel_residual"); false for x += attn(norm₁(x)) then x += mlp(norm₂(x)).</summary>
    public required bool ParallelResidual { get; init; }

    /// <summary>The keys a position attends to in the sliding-window layers, itself included (config "sliding_window"); 0 for none.</summary>
    public required int SlidingWindow { get; init; }

    /// <summary>The first layer that uses <see cref="SlidingWindow"/> (0 for Mistral; Qwen2's "max_window_layers"); every later layer uses it too.</summary>
    public required int SlidingWindowFromLayer { get; init; }

    /// <summary>True when the output head is the token-embedding matrix (config "tie_word_embeddings"; absent: true for
    /// GPT-2, false for the other families, as their published configs default).</summary>
    public required bool TiedHead { get; init; }

    /// <summary>The model_type spelling of <see cref="Family"/>.</summary>
    public string ModelType => Family switch
    {
        ModelFamily.Gpt2 => "gpt2",
        ModelFamily.Llama => "llama",
        ModelFamily.Mistral => "mistral",
        ModelFamily.Qwen2 => "qwen2",
        _ => "gpt_neox",
    };

    /// <summary>The family in words: "GPT-2", "Llama-style", "Mistral-style", "Qwen2-style" or "NeoX-style".</summary>
    public string FamilyName => Family switch
    {
        ModelFamily.Gpt2 => "GPT-2",
        ModelFamily.Llama => "Llama-style",
        ModelFamily.Mistral => "Mistral-style",
        ModelFamily.Qwen2 => "Qwen2-style",
        _ => "NeoX-style",
    };

    /// <summary>
    /// Parameters of the model, counting a tied head once: the token embedding V·d (and P·d learned positions); per
    /// block its two norms (2d each with a bias, d without), attention d·(h·hd) + 2·d·(kv·hd) + (h·hd)·d plus biases,
    /// the MLP (2 or 3)·d·m plus biases; the final norm; an untied head adds V·d.
    /// </summary>
    public long ParameterCount
    {
        get
        {
            long d = Width, m = InnerWidth, q = (long)Heads * HeadWidth, kv = (long)KeyValueHeads * HeadWidth;
            long norm = Norm == NormKind.LayerNorm ? 2 * d : d;
            long attention = (d * q) + (2 * d * kv) + (q * d)
                + (Biases == LinearBiases.None ? 0 : q + (2 * kv)) + (Biases == LinearBiases.All ? d : 0);
            long mlp = ((GatedMlp ? 3 : 2) * d * m) + (Biases == LinearBiases.All ? m + d : 0);
            long total = ((long)VocabularySize * d) + (Rotary is null ? (long)ContextLength * d : 0)
                + (Layers * ((2 * norm) + attention + mlp)) + norm;
            return TiedHead ? total : total + ((long)VocabularySize * d);
        }
    }

    /// <summary>Whether layer <paramref name="layer"/> (0-based block index) attends within <see cref="SlidingWindow"/>.</summary>
    public bool IsSlidingLayer(int layer) => SlidingWindow > 0 && layer >= SlidingWindowFromLayer;

    /// <summary>The block recipe in words (norm, positions, attention, MLP, residual, head), as inspect shows it.</summary>
    public string Recipe
    {
        get
        {
            CultureInfo inv = CultureInfo.InvariantCulture;
            string eps = NormEpsilon.ToString("0.#####e-0", inv);
            string norm = Norm == NormKind.LayerNorm ? $"LayerNorm (ε {eps})" : $"RMSNorm in float32 (ε {eps})";
            string positions = Rotary is { } r ? r.ToString() : string.Create(inv, $"learned positions ({ContextLength})");
            string attention = string.Create(inv, $"attention {Heads} heads of {HeadWidth}") + (KeyValueHeads == Heads
                ? ""
                : string.Create(inv, $", {KeyValueHeads} key/value heads (groups of {Heads / KeyValueHeads})"));
            if (SlidingWindow > 0)
            {
                attention += string.Create(inv, $", sliding window {SlidingWindow}") + (SlidingWindowFromLayer > 0 ? string.Create(inv, $" from layer {SlidingWindowFromLayer}") : "");
            }
            string biases = Biases switch
            {
                LinearBiases.All => "biases on every projection",
                LinearBiases.QueryKeyValue => "biases on q, k and v",
                _ => "no biases",
            };
            string mlp = string.Create(inv, $"{(GatedMlp ? "gated " : "")}{Spell(Activation)} MLP {InnerWidth}");
            string residual = ParallelResidual ? "parallel residual" : "sequential residual";
            string head = TiedHead ? "head tied to the token embedding" : "separate head";
            return $"pre-norm {norm}; {positions}; {attention}; {mlp}; {biases}; {residual}; {head}";
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
        return modelType switch
        {
            null or "gpt2" => ParseGpt2(path, root),
            "llama" => ParseLlama(path, root, ModelFamily.Llama),
            "mistral" => ParseLlama(path, root, ModelFamily.Mistral),
            "qwen2" => ParseLlama(path, root, ModelFamily.Qwen2),
            "gpt_neox" => ParseNeoX(path, root),
            _ => throw new ModelConfigException(path, "model_type",
                $"'{Echo.Of(modelType)}' is not supported; this engine runs model_type gpt2, llama, mistral, qwen2 and gpt_neox"),
        };
    }

    private static string Spell(Activation a) => a switch
    {
        Activation.GeluTanh => "GELU (tanh)",
        Activation.GeluErf => "GELU (exact)",
        Activation.Silu => "SiLU",
        _ => "ReLU",
    };

    /// <summary>The activations the plain (ungated) MLPs of GPT-2 and NeoX take, by their config.json names.</summary>
    private static Activation PlainActivation(string path, string field, string name) => name switch
    {
        "gelu_new" or "gelu_pytorch_tanh" or "gelu_fast" => Activation.GeluTanh,
        "gelu" => Activation.GeluErf,
        "relu" => Activation.Relu,
        _ => throw new ModelConfigException(path, field,
            $"'{Echo.Of(name)}' is not supported; expected gelu_new, gelu_pytorch_tanh, gelu_fast, gelu or relu"),
    };

    private static int RequiredInt(string path, JsonElement root, string field, int min, int max)
    {
        if (!root.TryGetProperty(field, out JsonElement el))
        {
            throw new ModelConfigException(path, field, "missing; expected an integer");
        }
        return Int(path, el, field, min, max);
    }

    private static int? OptionalInt(string path, JsonElement root, string field, int min, int max) =>
        root.TryGetProperty(field, out JsonElement el) && el.ValueKind != JsonValueKind.Null ? Int(path, el, field, min, max) : null;

    private static int Int(string path, JsonElement el, string field, int min, int max)
    {
        if (el.ValueKind != JsonValueKind.Number || !el.TryGetInt64(out long v) || v < min || v > max)
        {
            throw new ModelConfigException(path, field,
                $"{Echo.Of(el.GetRawText())}; expected an integer in [{min.ToString(CultureInfo.InvariantCulture)}, {max.ToString(CultureInfo.InvariantCulture)}]");
        }
        return (int)v;
    }

    /// <summary>A number in the open interval (<paramref name="above"/>, <paramref name="below"/>), or null when absent.</summary>
    private static double? OptionalNumber(string path, JsonElement root, string field, double above, double below)
    {
        if (!root.TryGetProperty(field, out JsonElement el) || el.ValueKind == JsonValueKind.Null)
        {
            return null;
        }
        if (el.ValueKind != JsonValueKind.Number || !el.TryGetDouble(out double v) || !(v > above && v < below))
        {
            throw new ModelConfigException(path, field,
                string.Create(CultureInfo.InvariantCulture, $"{Echo.Of(el.GetRawText())}; expected a number in ({above:G}, {below:G})"));
        }
        return v;
    }

    private static float Epsilon(string path, JsonElement root, string field) =>
        (float)(OptionalNumber(path, root, field, 0, 1)
            ?? throw new ModelConfigException(path, field, "missing; expected a number such as 1e-05"));

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
