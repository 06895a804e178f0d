namespace Assay.Features;

/// <summary>What an extraction computes and how it batches. Checked as it is built: an invalid value throws from its initializer.</summary>
public sealed record ExtractionOptions
{
    /// <summary>The prompt around each text.</summary>
    public PromptTemplate Prompt { get; init => field = value ?? throw new ArgumentNullException(nameof(Prompt)); } = PromptTemplate.TextOnly;

    /// <summary>The features, in the order their arrays are listed: at least one.</summary>
    /// <exception cref="ArgumentException">None, or a null entry.</exception>
    public IReadOnlyList<FeatureRequest> Features
    {
        get;
        init
        {
            ArgumentNullException.ThrowIfNull(value);
            if (value.Count == 0 || value.Any(f => f is null))
            {
                throw new ArgumentException(value.Count == 0 ? "no features requested" : "a feature request is null", nameof(Features));
            }
            field = [.. value];
        }
    } = [new HiddenStateFeature(-1), new ConditionalMeanFeature()];

    /// <summary>Which end of an over-long text to keep. The prompt is never cut.</summary>
    public TextTruncation Truncation { get; init; } = TextTruncation.KeepHead;

    /// <summary>
    /// Score words and completions with one space before them (" animal"), the way a word follows another in
    /// running text with GPT-2's byte-level tokens. Off: use them exactly as given.
    /// </summary>
    public bool LeadingSpace { get; init; } = true;

    /// <summary>Whether each sequence starts with the tokenizer's beginning-of-sequence token (default: as the checkpoint's tokenizer configuration says).</summary>
    public Tokenization.BeginningOfSequence BeginningOfSequence { get; init; } = Tokenization.BeginningOfSequence.Auto;

    /// <summary>Tokens per forward pass, at least 1: texts of similar length are batched until their tokens reach this budget.</summary>
    /// <exception cref="ArgumentOutOfRangeException">Less than 1.</exception>
    public int TokenBudget
    {
        get;
        init => field = value >= 1 ? value : throw new ArgumentOutOfRangeException(nameof(TokenBudget), value, "expected a positive number of tokens");
    } = 4096;

    /// <summary>Worker threads (0: all cores). Results do not depend on it.</summary>
    /// <exception cref="ArgumentOutOfRangeException">Negative.</exception>
    public int MaxThreads
    {
        get;
        init => field = value >= 0 ? value : throw new ArgumentOutOfRangeException(nameof(MaxThreads), value, "expected 0 (all cores) or a positive count");
    }
}
