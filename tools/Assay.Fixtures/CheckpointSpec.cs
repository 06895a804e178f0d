namespace Assay.Fixtures;

/// <summary>Which tokenizer files a synthetic checkpoint folder carries.</summary>
public enum TokenizerFiles
{
    /// <summary>None: the engine falls back to the embedded GPT-2 encoding (needs vocab_size ≥ 50257).</summary>
    None,

    /// <summary>vocab.json + merges.txt of a small byte-level vocabulary: 256 byte tokens, a few merges, end of text.</summary>
    SmallByteLevel,

    /// <summary>The same small vocabulary as a JSON tokenizer definition (tokenizer.json).</summary>
    SmallByteLevelDefinition,

    /// <summary>vocab.json + merges.txt of the full GPT-2 vocabulary, derived from the embedded GPT-2 encoding.</summary>
    Gpt2,
}

/// <summary>
/// The shape and storage of a synthetic checkpoint with deterministic random weights, in the published layout of its
/// family (<see cref="Family"/>: the config.json model_type).
/// </summary>
public sealed record CheckpointSpec
{
    /// <summary>model_type: "gpt2", "llama", "mistral", "qwen2" or "gpt_neox".</summary>
    public string Family { get; init; } = "gpt2";

    /// <summary>num_key_value_heads (rotary Llama-style families); null writes none (as many as the query heads).</summary>
    public int? KeyValueHeads { get; init; }

    /// <summary>head_dim, written only when set (Llama-style families).</summary>
    public int? HeadDim { get; init; }

    /// <summary>rope_theta (Llama-style) or rotary_emb_base (NeoX).</summary>
    public double RopeTheta { get; init; } = 10000;

    /// <summary>The rope_scaling object as JSON text, or null.</summary>
    public string? RopeScaling { get; init; }

    /// <summary>sliding_window (Mistral; Qwen2 with <see cref="MaxWindowLayers"/> set, which turns use_sliding_window on).</summary>
    public int? SlidingWindow { get; init; }

    /// <summary>Qwen2's max_window_layers; when set, use_sliding_window is true.</summary>
    public int? MaxWindowLayers { get; init; }

    /// <summary>NeoX rotary_pct.</summary>
    public double RotaryPct { get; init; } = 0.25;

    /// <summary>NeoX use_parallel_residual.</summary>
    public bool ParallelResidual { get; init; } = true;

    public int Width { get; init; } = 48;
    public int Layers { get; init; } = 2;
    public int Heads { get; init; } = 3;
    public int Context { get; init; } = 32;
    public int Vocabulary { get; init; } = 300;
    public int? Inner { get; init; }
    public string Activation { get; init; } = "gelu_new";
    /// <summary>tie_word_embeddings (written for every family).</summary>
    public bool Tied { get; init; } = true;

    /// <summary>F32, F16 or BF16.</summary>
    public string DType { get; init; } = "F32";

    /// <summary>Store names with the "transformer." prefix (GPT-2 only).</summary>
    public bool Prefix { get; init; }

    /// <summary>Store the per-block buffers of published files: GPT-2's and NeoX's causal masks, the rotary families' inv_freq tables.</summary>
    public bool MaskBuffers { get; init; } = true;

    /// <summary>1 for model.safetensors; more for shards with model.safetensors.index.json.</summary>
    public int Shards { get; init; } = 1;

    public ulong Seed { get; init; } = 1;

    public TokenizerFiles Tokenizer { get; init; } = TokenizerFiles.SmallByteLevel;

    public int InnerWidth => Inner ?? 4 * Width;

    /// <summary>Query heads' width: <see cref="HeadDim"/> or d / heads.</summary>
    public int HeadWidth => HeadDim ?? Width / Heads;

    /// <summary>Key/value heads: <see cref="KeyValueHeads"/> or the query heads.</summary>
    public int KvHeads => KeyValueHeads ?? Heads;

    /// <summary>Whether this is a Llama-style family (llama, mistral, qwen2).</summary>
    public bool LlamaStyle => Family is "llama" or "mistral" or "qwen2";

    /// <summary>The published GPT-2 small shape: 12 layers, width 768, 12 heads, 1024 positions, 50257 tokens.</summary>
    public static CheckpointSpec Gpt2Small { get; } = new()
    {
        Width = 768, Layers = 12, Heads = 12, Context = 1024, Vocabulary = 50257, Tokenizer = TokenizerFiles.Gpt2,
    };

    /// <summary>
    /// A Llama-style 1B shape: hidden 2048, 16 layers, 32 heads on 8 key/value heads, gated MLP 8192, vocabulary
    /// 128,256, tied, stored in bfloat16 (2.5 GB), with the GPT-2 tokenizer files so text commands run on it.
    /// </summary>
    public static CheckpointSpec Llama1B { get; } = new()
    {
        Family = "llama", Width = 2048, Layers = 16, Heads = 32, KeyValueHeads = 8, Inner = 8192, Vocabulary = 128256,
        Context = 4096, RopeTheta = 500000, Tied = true, DType = "BF16", MaskBuffers = false, Tokenizer = TokenizerFiles.Gpt2,
    };

    /// <summary>
    /// A Llama-style 8B shape: hidden 4096, 32 layers, 32 heads on 8 key/value heads, gated MLP 14336, vocabulary
    /// 128,256, untied, stored in bfloat16 (16 GB), with the GPT-2 tokenizer files.
    /// </summary>
    public static CheckpointSpec Llama8B { get; } = new()
    {
        Family = "llama", Width = 4096, Layers = 32, Heads = 32, KeyValueHeads = 8, Inner = 14336, Vocabulary = 128256,
        Context = 4096, RopeTheta = 500000, Tied = false, DType = "BF16", MaskBuffers = false, Tokenizer = TokenizerFiles.Gpt2,
    };

    /// <summary>A small model with the GPT-2 vocabulary, for the demo command.</summary>
    public static CheckpointSpec Demo { get; } = new()
    {
        Width = 256, Layers = 4, Heads = 4, Context = 128, Vocabulary = 50257, DType = "F16", Tokenizer = TokenizerFiles.Gpt2,
    };
}
