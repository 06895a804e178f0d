using System.Globalization;

namespace Assay.Features;

/// <summary>
/// The written form of feature lists, as <c>assay extract --features</c> and study files take them: comma-separated
/// kinds, each parsed by its own kind (<see cref="HiddenStateFeature"/>, <see cref="NextWordFeature"/>,
/// <see cref="TopTokensFeature"/>, <see cref="WordListFeature"/>, <see cref="ConditionalMeanFeature"/>,
/// <see cref="CompletionFeature"/>) and printed back by <see cref="FeatureRequest.Spec"/>.
/// </summary>
public static class FeatureSpec
{
    /// <summary>The list an extraction computes when none is given.</summary>
    public const string Default = "hidden,cmean";

    /// <summary>Every kind's spelling, for messages and help.</summary>
    public static string Syntax { get; } = string.Join(", ", Kinds.Select(k => k.Syntax));

    private static IEnumerable<(string Name, string Syntax, Func<Item, IEnumerable<FeatureRequest>> Parse)> Kinds =>
    [
        (HiddenStateFeature.Name, HiddenStateFeature.Syntax, HiddenStateFeature.Parse),
        (NextWordFeature.Name, NextWordFeature.Name, NextWordFeature.Parse),
        (TopTokensFeature.Name, TopTokensFeature.Syntax, TopTokensFeature.Parse),
        (WordListFeature.Name, WordListFeature.Name, WordListFeature.Parse),
        (WordListFeature.LogLikelihoodName, WordListFeature.LogLikelihoodName, WordListFeature.Parse),
        (ConditionalMeanFeature.Name, ConditionalMeanFeature.Name, ConditionalMeanFeature.Parse),
        (CompletionFeature.Name, CompletionFeature.Name, CompletionFeature.Parse),
    ];

    /// <summary>
    /// Parses a comma-separated list for a model of <paramref name="layers"/> blocks. Kinds that read an item list
    /// (<see cref="WordListFeature.ListName"/>, <see cref="CompletionFeature.ListName"/>) get it from
    /// <paramref name="lists"/>, which is asked once per list and may refuse with its own message.
    /// </summary>
    /// <exception cref="ArgumentException">An unknown kind, a malformed part, or an empty list.</exception>
    public static IReadOnlyList<FeatureRequest> Parse(string list, int layers, Func<string, IReadOnlyList<string>>? lists = null)
    {
        ArgumentNullException.ThrowIfNull(list);
        var result = new List<FeatureRequest>();
        var cache = new Dictionary<string, IReadOnlyList<string>>(StringComparer.Ordinal);
        IReadOnlyList<string> Resolve(string name, string raw)
        {
            if (!cache.TryGetValue(name, out IReadOnlyList<string>? items))
            {
                items = lists?.Invoke(name) ?? throw new ArgumentException($"\"{raw}\" needs the {name} list, and none was given");
                cache[name] = items;
            }
            return items;
        }
        foreach (string raw in list.Split(',', StringSplitOptions.TrimEntries | StringSplitOptions.RemoveEmptyEntries))
        {
            var item = new Item(raw, raw.Split(':'), layers, Resolve);
            var kind = Kinds.FirstOrDefault(k => k.Name == item.Parts[0]);
            if (kind.Parse == null)
            {
                throw item.Unknown();
            }
            result.AddRange(kind.Parse(item));
        }
        return result.Count > 0 ? result : throw new ArgumentException("the feature list is empty");
    }

    /// <summary>
    /// The files (.npy) a feature list writes for a model of <paramref name="config"/>, in order (word and completion
    /// lists are not needed: their names do not depend on the items).
    /// </summary>
    /// <exception cref="ArgumentException">The list does not parse or does not fit the model.</exception>
    public static IReadOnlyList<string> OutputFiles(string list, Config.ModelConfig config)
    {
        ArgumentNullException.ThrowIfNull(config);
        var shape = ModelShape.Of(config);
        return [.. Parse(list, config.Layers, _ => [""]).SelectMany(r => r.Outputs(shape)).Select(o => o.Name + ".npy")];
    }

    /// <summary>One comma-separated entry being parsed, with the helpers the kinds' parsers share.</summary>
    internal sealed class Item(string raw, string[] parts, int layers, Func<string, string, IReadOnlyList<string>> lists)
    {
        public string Raw { get; } = raw;

        /// <summary>The entry split at ':'; Parts[0] is the kind's name.</summary>
        public string[] Parts { get; } = parts;

        public int Layers { get; } = layers;

        public IReadOnlyList<string> List(string name) => lists(name, Raw);

        public ArgumentException Error(string problem) => new($"\"{Raw}\": {problem}");

        public ArgumentException Unknown() => new($"unknown feature \"{Raw}\"; the kinds are {Syntax}");

        /// <summary>The requests of a kind that takes no parameters, or a refusal when some were given.</summary>
        public IEnumerable<FeatureRequest> Bare(Func<FeatureRequest> make) => Parts.Length == 1 ? [make()] : throw Unknown();

        public int Integer(string text) =>
            int.TryParse(text, NumberStyles.AllowLeadingSign, CultureInfo.InvariantCulture, out int n)
                ? n
                : throw Error($"\"{text}\" is not a whole number");
    }
}
