namespace Assay.Features;

/// <summary>Every feature of one input text, in the order of <see cref="FeatureExtractor.Outputs"/>.</summary>
public sealed class FeatureRow
{
    private readonly float[]?[] _values;
    private readonly int[]?[] _ids;

    internal FeatureRow(long index, int tokenCount, int truncatedTokens, float[]?[] values, int[]?[] ids)
    {
        Index = index;
        TokenCount = tokenCount;
        TruncatedTokens = truncatedTokens;
        _values = values;
        _ids = ids;
    }

    /// <summary>The text's position in the input, from 0.</summary>
    public long Index { get; }

    /// <summary>Tokens of the filled template (prompt and text, after truncation).</summary>
    public int TokenCount { get; }

    /// <summary>Text tokens cut off to fit the context; 0 when the text fit.</summary>
    public int TruncatedTokens { get; }

    /// <summary>The values of a <see cref="FeatureElement.Real"/> output.</summary>
    /// <exception cref="InvalidOperationException">The output holds token ids.</exception>
    public ReadOnlySpan<float> Values(int output) =>
        _values[output] ?? throw new InvalidOperationException($"output {output} holds token ids; read it with TokenIds");

    /// <summary>The ids of a <see cref="FeatureElement.TokenId"/> output.</summary>
    /// <exception cref="InvalidOperationException">The output holds floating values.</exception>
    public ReadOnlySpan<int> TokenIds(int output) =>
        _ids[output] ?? throw new InvalidOperationException($"output {output} holds floating values; read it with Values");
}
