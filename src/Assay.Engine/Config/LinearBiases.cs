namespace Assay.Config;

/// <summary>Which of a block's linear layers carry a bias.</summary>
public enum LinearBiases
{
    /// <summary>None (Llama, Mistral).</summary>
    None,

    /// <summary>The query, key and value projections only (Qwen2).</summary>
    QueryKeyValue,

    /// <summary>Every projection of attention and MLP (GPT-2, NeoX).</summary>
    All,
}
