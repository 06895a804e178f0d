namespace Assay.Config;

/// <summary>The architecture family of a checkpoint, from config.json's "model_type".</summary>
public enum ModelFamily
{
    /// <summary>GPT-2 ("gpt2", or no model_type): learned positions, pre-norm LayerNorm blocks, fused q/k/v, biases everywhere.</summary>
    Gpt2,

    /// <summary>Llama-style ("llama"): RMSNorm, rotary positions, grouped-query attention, gated SiLU MLP, no biases.</summary>
    Llama,

    /// <summary>Mistral-style ("mistral"): as Llama, with a sliding attention window when the config sets one.</summary>
    Mistral,

    /// <summary>Qwen2-style ("qwen2"): as Llama, with q/k/v biases and an optional sliding window on the upper layers.</summary>
    Qwen2,

    /// <summary>NeoX-style ("gpt_neox", e.g. Pythia): LayerNorm with bias, partial rotary positions, fused per-head q/k/v,
    /// parallel or sequential residual, biases everywhere, an untied output embedding.</summary>
    GptNeoX,
}
