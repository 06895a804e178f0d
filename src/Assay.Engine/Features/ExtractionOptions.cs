namespace Assay.Features;

/// <summary>What an extraction computes and how it batches.</summary>
public sealed record ExtractionOptions
{
    /// <summary>The prompt around each text.</summary>
    public PromptTemplate Prompt { get; init; } = PromptTemplate.TextOnly;

    /// <summary>The features, in the order their arrays are listed.</summary>
    public IReadOnlyList<FeatureRequest> Features { get; init; } = [new HiddenStateFeature(-1), new ConditionalMeanFeature()];

    /// <summary>Which end of an over-long text to keep. The prompt is never cut.</summary>
    public TextTruncation Truncation { get; init; } = TextTruncation.KeepHead;

    /// <summary>
    /// Score words and completions with one space before them (" animal"), the way a word follows another in
    /// running text with GPT-2's byte-level tokens. Off: use them exactly as given.
    /// </summary>
    public bool LeadingSpace { get; init; } = true;

    /// <summary>Whether each sequence starts with the tokenizer's beginning-of-sequence token (default: as the checkpoint's tokenizer configuration says).</summary>
    public Tokenization.BeginningOfSequence BeginningOfSequence { get; init; } = Tokenization.BeginningOfSequence.Auto;

    /// <summary>Tokens per forward pass: texts of similar length are batched until their tokens reach this budget.</summary>
    public int TokenBudget { get; init; } = 4096;

    /// <summary>Worker threads (0: all cores). Results do not depend on it.</summary>
    public int MaxThreads { get; init; }
}
