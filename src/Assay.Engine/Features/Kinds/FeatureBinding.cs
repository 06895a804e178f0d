using Assay.Model;

namespace Assay.Features;

/// <summary>What a feature step may read while it is bound: the model, the extraction's options and a tokenizer for its words.</summary>
internal sealed class FeatureBinding(LanguageModel model, ExtractionOptions options)
{
    public LanguageModel Model { get; } = model;

    public ExtractionOptions Options { get; } = options;

    /// <summary>Token ids of each item, with a leading space when <see cref="ExtractionOptions.LeadingSpace"/>.</summary>
    /// <exception cref="ArgumentException">The list is empty, or an item is null or has no tokens.</exception>
    public int[][] EncodeAll(IReadOnlyList<string> items, string what)
    {
        if (items.Count == 0)
        {
            throw new ArgumentException($"the {what} list is empty", nameof(items));
        }
        var result = new int[items.Count][];
        for (int i = 0; i < items.Count; i++)
        {
            string item = items[i] ?? throw new ArgumentException($"{what} {i + 1} is null", nameof(items));
            // Words and completions follow the text in the same sequence.
            result[i] = Model.Tokenizer.EncodeContinuation(Options.LeadingSpace ? " " + item : item);
            if (result[i].Length == 0)
            {
                throw new ArgumentException($"{what} {i + 1} (\"{item}\") has no tokens", nameof(items));
            }
        }
        return result;
    }
}
