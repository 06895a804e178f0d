using Assay.Features;

namespace Assay.Tests.Features;

/// <summary>The written form of feature lists: each kind parses what it prints, and refusals name the entry.</summary>
public sealed class FeatureSpecTests
{
    private static readonly string[] Words = ["animal", "living thing"];
    private static readonly string[] Candidates = [" a person", " a place"];

    private static IReadOnlyList<string> Lists(string name) => name == WordListFeature.ListName ? Words : Candidates;

    [Theory]
    [InlineData("hidden", "hidden:-1:last")]
    [InlineData("hidden:2", "hidden:2:last")]
    [InlineData("hidden:-2:mean", "hidden:-2:mean")]
    [InlineData("hidden:0:mark", "hidden:0:mark")]
    [InlineData("hidden:mean", "hidden:-1:mean")]
    [InlineData("hidden:last", "hidden:-1:last")]
    [InlineData("nextword", "nextword")]
    [InlineData("topk:7", "topk:7")]
    [InlineData("words", "words")]
    [InlineData("words-loglik", "words-loglik")]
    [InlineData("cmean", "cmean")]
    [InlineData("completions", "completions")]
    public void Every_kind_parses_what_it_prints(string written, string spec)
    {
        FeatureRequest request = FeatureSpec.Parse(written, layers: 4, Lists).Single();
        Assert.Equal(spec, request.Spec);
        FeatureRequest again = FeatureSpec.Parse(request.Spec, layers: 4, Lists).Single();
        Assert.Equal(request.GetType(), again.GetType());
        Assert.Equal(request.Spec, again.Spec);
        Assert.Equal(request.Describe().ToJsonString(), again.Describe().ToJsonString());
    }

    [Fact]
    public void Hidden_all_is_one_request_per_layer_and_lists_are_asked_once()
    {
        int asked = 0;
        IReadOnlyList<FeatureRequest> r = FeatureSpec.Parse("hidden:all:mean,words,words-loglik", layers: 3, name =>
        {
            asked++;
            return Words;
        });
        Assert.Equal(["hidden:0:mean", "hidden:1:mean", "hidden:2:mean", "hidden:3:mean", "words", "words-loglik"], r.Select(x => x.Spec));
        Assert.Equal(1, asked);
        Assert.Equal(Words, ((WordListFeature)r[^1]).Words);
    }

    [Theory]
    [InlineData("probs", "unknown feature \"probs\"; the kinds are hidden[:LAYER|all][:last|mean|mark], nextword, topk:K, words, words-loglik, cmean, completions")]
    [InlineData("cmean:3", "unknown feature \"cmean:3\"")]
    [InlineData("topk", "unknown feature \"topk\"")]
    [InlineData("topk:0", "\"topk:0\": expected a positive number, found 0")]
    [InlineData("hidden:1:2:3", "\"hidden:1:2:3\": has too many parts")]
    [InlineData(" , ", "the feature list is empty")]
    public void Malformed_entries_are_refused_with_the_entry(string written, string message)
    {
        var e = Assert.Throws<ArgumentException>(() => FeatureSpec.Parse(written, layers: 4, Lists));
        Assert.Contains(message, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_kind_that_needs_a_list_says_so_when_none_is_given() =>
        Assert.Contains("\"words\" needs the words list", Assert.Throws<ArgumentException>(() => FeatureSpec.Parse("words", 4)).Message, StringComparison.Ordinal);

    [Theory]
    [InlineData(-1, 4, 4)]
    [InlineData(-5, 4, 0)]
    [InlineData(0, 4, 0)]
    [InlineData(4, 4, 4)]
    public void Negative_layers_count_from_the_end(int layer, int layers, int expected) =>
        Assert.Equal(expected, HiddenStateFeature.ResolveLayer(layer, layers));

    [Theory]
    [InlineData(5, 4)]
    [InlineData(-6, 4)]
    public void Layers_outside_the_model_are_refused(int layer, int layers) =>
        Assert.Contains("this model has layers 0 … 4", Assert.Throws<ArgumentException>(() => HiddenStateFeature.ResolveLayer(layer, layers)).Message, StringComparison.Ordinal);
}
