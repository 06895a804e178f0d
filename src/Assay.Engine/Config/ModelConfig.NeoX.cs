using System.Globalization;
using System.Text.Json;

namespace Assay.Config;

public sealed partial record ModelConfig
{
    /// <summary>
    /// NeoX configs (model_type "gpt_neox"): hidden_size, num_hidden_layers, num_attention_heads, intermediate_size,
    /// vocab_size, max_position_embeddings, layer_norm_eps, hidden_act, rotary_pct (or partial_rotary_factor),
    /// rotary_emb_base (or rope_theta; 10000 when absent), use_parallel_residual (true when absent),
    /// tie_word_embeddings (false when absent).
    /// </summary>
    private static ModelConfig ParseNeoX(string path, JsonElement root)
    {
        int width = RequiredInt(path, root, "hidden_size", 1, 1 << 16);
        int layers = RequiredInt(path, root, "num_hidden_layers", 1, 1024);
        int heads = RequiredInt(path, root, "num_attention_heads", 1, width);
        if (width % heads != 0)
        {
            throw new ModelConfigException(path, "num_attention_heads", $"{heads} does not divide hidden_size = {width}");
        }
        int headWidth = width / heads;
        int context = RequiredInt(path, root, "max_position_embeddings", 1, 1 << 24);
        int vocab = RequiredInt(path, root, "vocab_size", 1, 1 << 24);
        int inner = RequiredInt(path, root, "intermediate_size", 1, 1 << 20);
        float eps = Epsilon(path, root, "layer_norm_eps");
        string act = OptionalString(path, root, "hidden_act")
            ?? throw new ModelConfigException(path, "hidden_act", "missing; expected e.g. \"gelu\"");

        string pctField = root.TryGetProperty("rotary_pct", out _) ? "rotary_pct" : "partial_rotary_factor";
        double pct = OptionalNumber(path, root, pctField, 0, 1.000001)
            ?? throw new ModelConfigException(path, "rotary_pct", "missing; expected the share of each head's dimensions that rotate, e.g. 0.25");
        double exact = headWidth * pct;
        int rotaryDims = (int)Math.Round(exact);
        if (Math.Abs(exact - rotaryDims) > 1e-9 || rotaryDims % 2 != 0 || rotaryDims == 0)
        {
            throw new ModelConfigException(path, pctField, string.Create(CultureInfo.InvariantCulture,
                $"{pct:G} of heads of width {headWidth} is {exact:G} dimensions; expected a whole, even, non-zero number"));
        }
        string baseField = root.TryGetProperty("rotary_emb_base", out _) ? "rotary_emb_base" : "rope_theta";
        double theta = OptionalNumber(path, root, baseField, 1, double.MaxValue) ?? 10000;
        if (root.TryGetProperty("rope_scaling", out JsonElement scaling) && scaling.ValueKind != JsonValueKind.Null)
        {
            throw new ModelConfigException(path, "rope_scaling", "is not supported for gpt_neox; expected null");
        }
        RequireIfPresent(path, root, "attention_bias", true);

        return new ModelConfig
        {
            Family = ModelFamily.GptNeoX,
            Width = width,
            Layers = layers,
            Heads = heads,
            KeyValueHeads = heads,
            HeadWidth = headWidth,
            ContextLength = context,
            VocabularySize = vocab,
            InnerWidth = inner,
            Norm = NormKind.LayerNorm,
            NormEpsilon = eps,
            Activation = PlainActivation(path, "hidden_act", act),
            GatedMlp = false,
            Biases = LinearBiases.All,
            Rotary = new RotaryPositions(rotaryDims, theta),
            ParallelResidual = OptionalBool(path, root, "use_parallel_residual") ?? true,
            SlidingWindow = 0,
            SlidingWindowFromLayer = 0,
            TiedHead = OptionalBool(path, root, "tie_word_embeddings") ?? false,
        };
    }
}
