using System.Text.Json;

namespace Assay.Config;

public sealed partial record ModelConfig
{
    /// <summary>GPT-2 (model_type "gpt2" or none): n_embd, n_layer, n_head, n_positions, vocab_size, n_inner,
    /// layer_norm_epsilon, activation_function, tie_word_embeddings.</summary>
    private static ModelConfig ParseGpt2(string path, JsonElement root)
    {
        int width = RequiredInt(path, root, "n_embd", 1, 1 << 16);
        int layers = RequiredInt(path, root, "n_layer", 1, 1024);
        int heads = RequiredInt(path, root, "n_head", 1, width);
        if (width % heads != 0)
        {
            throw new ModelConfigException(path, "n_head", $"{heads} does not divide n_embd = {width}");
        }
        int positions = RequiredInt(path, root, "n_positions", 1, 1 << 20);
        int vocab = RequiredInt(path, root, "vocab_size", 1, 1 << 24);
        int inner = OptionalInt(path, root, "n_inner", 1, 1 << 20) ?? checked(4 * width);
        float eps = Epsilon(path, root, "layer_norm_epsilon");
        string activation = OptionalString(path, root, "activation_function")
            ?? throw new ModelConfigException(path, "activation_function", "missing; expected e.g. \"gelu_new\"");

        // Variants of the architecture this engine does not implement are refused rather than run wrongly.
        RequireIfPresent(path, root, "scale_attn_weights", true);
        RequireIfPresent(path, root, "scale_attn_by_inverse_layer_idx", false);
        RequireIfPresent(path, root, "add_cross_attention", false);

        return new ModelConfig
        {
            Family = ModelFamily.Gpt2,
            Width = width,
            Layers = layers,
            Heads = heads,
            KeyValueHeads = heads,
            HeadWidth = width / heads,
            ContextLength = positions,
            VocabularySize = vocab,
            InnerWidth = inner,
            Norm = NormKind.LayerNorm,
            NormEpsilon = eps,
            Activation = PlainActivation(path, "activation_function", activation),
            GatedMlp = false,
            Biases = LinearBiases.All,
            Rotary = null,
            ParallelResidual = false,
            SlidingWindow = 0,
            SlidingWindowFromLayer = 0,
            TiedHead = OptionalBool(path, root, "tie_word_embeddings") ?? true,
        };
    }
}
