using System.Globalization;
using System.Text.Json;

namespace Assay.Config;

public sealed partial record ModelConfig
{
    /// <summary>
    /// Llama-style configs (model_type "llama", "mistral", "qwen2"): hidden_size, num_hidden_layers,
    /// num_attention_heads, num_key_value_heads, head_dim, intermediate_size, vocab_size, max_position_embeddings,
    /// rms_norm_eps, hidden_act (silu), rope_theta (10000 when absent, the published default), rope_scaling (linear or
    /// llama3), tie_word_embeddings (false when absent); Mistral's sliding_window; Qwen2's use_sliding_window,
    /// sliding_window and max_window_layers.
    /// </summary>
    private static ModelConfig ParseLlama(string path, JsonElement root, ModelFamily family)
    {
        int width = RequiredInt(path, root, "hidden_size", 1, 1 << 16);
        int layers = RequiredInt(path, root, "num_hidden_layers", 1, 1024);
        int heads = RequiredInt(path, root, "num_attention_heads", 1, 1 << 12);
        int kvHeads = OptionalInt(path, root, "num_key_value_heads", 1, heads) ?? heads;
        if (heads % kvHeads != 0)
        {
            throw new ModelConfigException(path, "num_key_value_heads", $"{kvHeads} does not divide num_attention_heads = {heads}");
        }
        int? headDim = OptionalInt(path, root, "head_dim", 2, 1 << 12);
        if (headDim is null && width % heads != 0)
        {
            throw new ModelConfigException(path, "num_attention_heads", $"{heads} does not divide hidden_size = {width} (and no head_dim is given)");
        }
        int headWidth = headDim ?? width / heads;
        int context = RequiredInt(path, root, "max_position_embeddings", 1, 1 << 24);
        int vocab = RequiredInt(path, root, "vocab_size", 1, 1 << 24);
        int inner = RequiredInt(path, root, "intermediate_size", 1, 1 << 20);
        float eps = Epsilon(path, root, "rms_norm_eps");
        string act = OptionalString(path, root, "hidden_act")
            ?? throw new ModelConfigException(path, "hidden_act", "missing; expected \"silu\"");
        if (act != "silu")
        {
            throw new ModelConfigException(path, "hidden_act", $"'{Echo.Of(act)}' is not supported; the gated MLP of this family takes \"silu\"");
        }
        if (family != ModelFamily.Qwen2)
        {
            RequireIfPresent(path, root, "attention_bias", false);
        }
        RequireIfPresent(path, root, "mlp_bias", false);
        if (OptionalNumber(path, root, "partial_rotary_factor", 0, 1.000001) is double partial && partial != 1)
        {
            throw new ModelConfigException(path, "partial_rotary_factor",
                string.Create(CultureInfo.InvariantCulture, $"{partial:G} is not supported; this family rotates whole heads (1)"));
        }
        if (headWidth % 2 != 0)
        {
            throw new ModelConfigException(path, headDim is null ? "num_attention_heads" : "head_dim",
                $"heads of width {headWidth}; rotary positions need an even head width");
        }
        double theta = OptionalNumber(path, root, "rope_theta", 1, double.MaxValue) ?? 10000;
        RotaryPositions rotary = RopeScaling(path, root, new RotaryPositions(headWidth, theta));

        (int window, int fromLayer) = family switch
        {
            ModelFamily.Mistral => (OptionalInt(path, root, "sliding_window", 1, int.MaxValue) ?? 0, 0),
            ModelFamily.Qwen2 when OptionalBool(path, root, "use_sliding_window") == true =>
                (OptionalInt(path, root, "sliding_window", 1, int.MaxValue)
                    ?? throw new ModelConfigException(path, "sliding_window", "missing; use_sliding_window is true"),
                 OptionalInt(path, root, "max_window_layers", 0, layers)
                    ?? throw new ModelConfigException(path, "max_window_layers", "missing; use_sliding_window is true, and it says which layers use the window")),
            _ => (0, 0),
        };
        var config = new ModelConfig
        {
            Family = family,
            Width = width,
            Layers = layers,
            Heads = heads,
            KeyValueHeads = kvHeads,
            HeadWidth = headWidth,
            ContextLength = context,
            VocabularySize = vocab,
            InnerWidth = inner,
            Norm = NormKind.RmsNorm,
            NormEpsilon = eps,
            Activation = Activation.Silu,
            GatedMlp = true,
            Biases = family == ModelFamily.Qwen2 ? LinearBiases.QueryKeyValue : LinearBiases.None,
            Rotary = rotary,
            ParallelResidual = false,
            // A window as long as the context never cuts anything off.
            SlidingWindow = window >= context ? 0 : window,
            SlidingWindowFromLayer = window >= context ? 0 : fromLayer,
            TiedHead = OptionalBool(path, root, "tie_word_embeddings") ?? false,
        };
        CheckLayerTypes(path, root, config);
        return config;
    }

    /// <summary>rope_scaling: null, or an object whose rope_type (or type) is "default", "linear" or "llama3".</summary>
    private static RotaryPositions RopeScaling(string path, JsonElement root, RotaryPositions plain)
    {
        if (!root.TryGetProperty("rope_scaling", out JsonElement s) || s.ValueKind == JsonValueKind.Null)
        {
            return plain;
        }
        if (s.ValueKind != JsonValueKind.Object)
        {
            throw new ModelConfigException(path, "rope_scaling", $"{Echo.Of(s.GetRawText())}; expected null or an object");
        }
        string field = s.TryGetProperty("rope_type", out _) ? "rope_type" : "type";
        string kind = OptionalString(path, s, field)
            ?? throw new ModelConfigException(path, "rope_scaling.rope_type", "missing; expected \"linear\" or \"llama3\"");
        switch (kind)
        {
            case "default":
                return plain;
            case "linear":
                return plain with { Scaling = RotaryScalingKind.Linear, Factor = Factor(path, s) };
            case "llama3":
            {
                double low = OptionalNumber(path, s, "low_freq_factor", 0, double.MaxValue)
                    ?? throw new ModelConfigException(path, "rope_scaling.low_freq_factor", "missing; llama3 scaling needs it");
                double high = OptionalNumber(path, s, "high_freq_factor", 0, double.MaxValue)
                    ?? throw new ModelConfigException(path, "rope_scaling.high_freq_factor", "missing; llama3 scaling needs it");
                if (!(high > low))
                {
                    throw new ModelConfigException(path, "rope_scaling.high_freq_factor",
                        string.Create(CultureInfo.InvariantCulture, $"{high:G} is not above low_freq_factor {low:G}"));
                }
                int original = OptionalInt(path, s, "original_max_position_embeddings", 1, 1 << 24)
                    ?? throw new ModelConfigException(path, "rope_scaling.original_max_position_embeddings", "missing; llama3 scaling needs it");
                return plain with
                {
                    Scaling = RotaryScalingKind.Llama3, Factor = Factor(path, s), LowFrequencyFactor = low, HighFrequencyFactor = high,
                    OriginalContext = original,
                };
            }
            default:
                throw new ModelConfigException(path, "rope_scaling." + field,
                    $"'{Echo.Of(kind)}' is not supported; this engine implements \"linear\" and \"llama3\" scaling");
        }
    }

    private static double Factor(string path, JsonElement scaling) =>
        OptionalNumber(path, scaling, "factor", 0, double.MaxValue)
            ?? throw new ModelConfigException(path, "rope_scaling.factor", "missing; expected a positive number");

    /// <summary>A "layer_types" list, where given, must say what the window fields say layer by layer.</summary>
    private static void CheckLayerTypes(string path, JsonElement root, ModelConfig c)
    {
        if (!root.TryGetProperty("layer_types", out JsonElement types) || types.ValueKind == JsonValueKind.Null)
        {
            return;
        }
        if (types.ValueKind != JsonValueKind.Array || types.GetArrayLength() != c.Layers)
        {
            throw new ModelConfigException(path, "layer_types", $"expected a list of {c.Layers} entries (num_hidden_layers)");
        }
        int i = 0;
        foreach (JsonElement t in types.EnumerateArray())
        {
            string expected = c.IsSlidingLayer(i) ? "sliding_attention" : "full_attention";
            if (t.ValueKind != JsonValueKind.String || t.GetString() != expected)
            {
                throw new ModelConfigException(path, "layer_types",
                    $"entry {i} is {Echo.Of(t.GetRawText())}; the window fields make layer {i} \"{expected}\", and other patterns are not supported");
            }
            i++;
        }
    }
}
