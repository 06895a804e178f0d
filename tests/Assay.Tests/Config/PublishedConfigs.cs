namespace Assay.Tests.Config;

/// <summary>
/// config.json texts in the field sets of published checkpoints (from memory; fields the engine ignores included), with
/// their parameter counts (values from memory), shared by the config tests and the weights-manifest entries.
/// </summary>
public static class PublishedConfigs
{
    /// <summary>A 1.1B Llama-style configuration: hidden 2048, 22 layers, 32 heads, 4 kv heads, intermediate 5632, vocab 32000, untied.</summary>
    public const string Llama11B = """
        {"architectures": ["LlamaForCausalLM"], "attention_bias": false, "bos_token_id": 1, "eos_token_id": 2, "hidden_act": "silu",
         "hidden_size": 2048, "initializer_range": 0.02, "intermediate_size": 5632, "max_position_embeddings": 2048,
         "model_type": "llama", "num_attention_heads": 32, "num_hidden_layers": 22, "num_key_value_heads": 4, "pretraining_tp": 1,
         "rms_norm_eps": 1e-05, "rope_scaling": null, "rope_theta": 10000.0, "tie_word_embeddings": false, "torch_dtype": "bfloat16",
         "use_cache": true, "vocab_size": 32000}
        """;

    /// <summary>Llama-3.2-1B: hidden 2048, 16 layers, 32/8 heads, intermediate 8192, vocab 128256, tied, llama3 rope scaling.</summary>
    public const string Llama32_1B = """
        {"architectures": ["LlamaForCausalLM"], "attention_bias": false, "attention_dropout": 0.0, "bos_token_id": 128000,
         "eos_token_id": 128001, "head_dim": 64, "hidden_act": "silu", "hidden_size": 2048, "initializer_range": 0.02,
         "intermediate_size": 8192, "max_position_embeddings": 131072, "mlp_bias": false, "model_type": "llama",
         "num_attention_heads": 32, "num_hidden_layers": 16, "num_key_value_heads": 8, "pretraining_tp": 1, "rms_norm_eps": 1e-05,
         "rope_scaling": {"factor": 32.0, "high_freq_factor": 4.0, "low_freq_factor": 1.0, "original_max_position_embeddings": 8192, "rope_type": "llama3"},
         "rope_theta": 500000.0, "tie_word_embeddings": true, "torch_dtype": "bfloat16", "use_cache": true, "vocab_size": 128256}
        """;

    /// <summary>Qwen2.5-0.5B: hidden 896, 24 layers, 14/2 heads, intermediate 4864, vocab 151936, tied, q/k/v biases.</summary>
    public const string Qwen25_05B = """
        {"architectures": ["Qwen2ForCausalLM"], "attention_dropout": 0.0, "bos_token_id": 151643, "eos_token_id": 151643,
         "hidden_act": "silu", "hidden_size": 896, "initializer_range": 0.02, "intermediate_size": 4864, "max_position_embeddings": 32768,
         "max_window_layers": 24, "model_type": "qwen2", "num_attention_heads": 14, "num_hidden_layers": 24, "num_key_value_heads": 2,
         "rms_norm_eps": 1e-06, "rope_theta": 1000000.0, "sliding_window": 32768, "tie_word_embeddings": true, "torch_dtype": "bfloat16",
         "use_cache": true, "use_sliding_window": false, "vocab_size": 151936}
        """;

    /// <summary>Pythia-160M: hidden 768, 12 layers, 12 heads, intermediate 3072, vocab 50304, untied, rotary_pct 0.25.</summary>
    public const string Pythia160M = """
        {"architectures": ["GPTNeoXForCausalLM"], "bos_token_id": 0, "eos_token_id": 0, "hidden_act": "gelu", "hidden_size": 768,
         "initializer_range": 0.02, "intermediate_size": 3072, "layer_norm_eps": 1e-05, "max_position_embeddings": 2048,
         "model_type": "gpt_neox", "num_attention_heads": 12, "num_hidden_layers": 12, "rotary_emb_base": 10000, "rotary_pct": 0.25,
         "tie_word_embeddings": false, "torch_dtype": "float16", "use_cache": true, "use_parallel_residual": true, "vocab_size": 50304}
        """;

    /// <summary>Mistral-7B (v0.1): hidden 4096, 32 layers, 32/8 heads, intermediate 14336, vocab 32000, untied, window 4096.</summary>
    public const string Mistral7B = """
        {"architectures": ["MistralForCausalLM"], "bos_token_id": 1, "eos_token_id": 2, "hidden_act": "silu", "hidden_size": 4096,
         "initializer_range": 0.02, "intermediate_size": 14336, "max_position_embeddings": 32768, "model_type": "mistral",
         "num_attention_heads": 32, "num_hidden_layers": 32, "num_key_value_heads": 8, "rms_norm_eps": 1e-05, "rope_theta": 10000.0,
         "sliding_window": 4096, "tie_word_embeddings": false, "torch_dtype": "bfloat16", "use_cache": true, "vocab_size": 32000}
        """;

    /// <summary>Each config with its parameter count (from memory, as quoted for these checkpoints) and its manifest entry's file name.</summary>
    public static readonly (string Entry, string Json, long Parameters)[] All =
    [
        ("llama-1.1b.json", Llama11B, 1_100_048_384),
        ("llama-3.2-1b.json", Llama32_1B, 1_235_814_400),
        ("qwen2.5-0.5b.json", Qwen25_05B, 494_032_768),
        ("pythia-160m.json", Pythia160M, 162_322_944),
        ("mistral-7b.json", Mistral7B, 7_241_732_096),
    ];
}
