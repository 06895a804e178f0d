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

/// <summary>The shape and storage of a synthetic GPT-2-layout checkpoint with deterministic random weights.</summary>
public sealed record CheckpointSpec
{
    public int Width { get; init; } = 48;
    public int Layers { get; init; } = 2;
    public int Heads { get; init; } = 3;
    public int Context { get; init; } = 32;
    public int Vocabulary { get; init; } = 300;
    public int? Inner { get; init; }
    public string Activation { get; init; } = "gelu_new";
    public bool Tied { get; init; } = true;

    /// <summary>F32, F16 or BF16.</summary>
    public string DType { get; init; } = "F32";

    /// <summary>Store names with the "transformer." prefix.</summary>
    public bool Prefix { get; init; }

    /// <summary>Store the per-block causal-mask buffers of published GPT-2 files.</summary>
    public bool MaskBuffers { get; init; } = true;

    /// <summary>1 for model.safetensors; more for shards with model.safetensors.index.json.</summary>
    public int Shards { get; init; } = 1;

    public ulong Seed { get; init; } = 1;

    public TokenizerFiles Tokenizer { get; init; } = TokenizerFiles.SmallByteLevel;

    public int InnerWidth => Inner ?? 4 * Width;

    /// <summary>The published GPT-2 small shape: 12 layers, width 768, 12 heads, 1024 positions, 50257 tokens.</summary>
    public static CheckpointSpec Gpt2Small { get; } = new()
    {
        Width = 768, Layers = 12, Heads = 12, Context = 1024, Vocabulary = 50257, Tokenizer = TokenizerFiles.Gpt2,
    };

    /// <summary>A small model with the GPT-2 vocabulary, for the demo command.</summary>
    public static CheckpointSpec Demo { get; } = new()
    {
        Width = 256, Layers = 4, Heads = 4, Context = 128, Vocabulary = 50257, DType = "F16", Tokenizer = TokenizerFiles.Gpt2,
    };
}
