using System.Text.Json.Nodes;

namespace Assay.Features;

/// <summary>
/// For each word of a list: the probability of its first token as the next token and, when
/// <see cref="FullLogLikelihood"/>, the log-likelihood of all its tokens as the continuation (natural log).
/// Spelled <c>words</c> (writes <c>words.first</c>) and <c>words-loglik</c> (also <c>words.loglik</c>); the words
/// come from the caller's list named "words".
/// </summary>
public sealed record WordListFeature(IReadOnlyList<string> Words, bool FullLogLikelihood = false) : FeatureRequest
{
    internal const string Name = "words";

    internal const string LogLikelihoodName = "words-loglik";

    /// <summary>The name of the item list the words come from (<see cref="FeatureSpec.Parse"/>).</summary>
    public const string ListName = "words";

    /// <inheritdoc/>
    public override string Spec => FullLogLikelihood ? LogLikelihoodName : Name;

    internal static IEnumerable<FeatureRequest> Parse(FeatureSpec.Item item) =>
        item.Bare(() => new WordListFeature(item.List(ListName), FullLogLikelihood: item.Parts[0] == LogLikelihoodName));

    internal override IReadOnlyList<FeatureOutput> Outputs(ModelShape shape) => FullLogLikelihood
        ? [new FeatureOutput("words.first", Words.Count, FeatureElement.Real, this), new FeatureOutput("words.loglik", Words.Count, FeatureElement.Real, this)]
        : [new FeatureOutput("words.first", Words.Count, FeatureElement.Real, this)];

    /// <summary>words-loglik stands for its log-likelihoods; words for its first-token probabilities.</summary>
    internal override int PrimaryOutput => FullLogLikelihood ? 1 : 0;

    internal override FeatureStep Bind(FeatureBinding binding, int firstOutput)
    {
        int[][] ids = binding.EncodeAll(Words, "word");
        return new Step(firstOutput, [.. ids.Select(x => x[0])], FullLogLikelihood ? ids : []);
    }

    internal override JsonObject Describe()
    {
        JsonObject o = base.Describe();
        o["words"] = new JsonArray([.. Words.Select(s => JsonValue.Create(s))]);
        return o;
    }

    private sealed class Step(int first, int[] firstTokens, int[][] continuations) : FeatureStep(first)
    {
        public override bool NeedsDistribution => true;

        public override IReadOnlyList<int[]> Continuations => continuations;

        protected override void FromDistribution(ReadOnlySpan<float> p, RowOutputs outputs)
        {
            float[] dst = outputs.Values(First);
            for (int w = 0; w < dst.Length; w++)
            {
                dst[w] = p[firstTokens[w]];
            }
        }

        public override void AddLogProbability(int continuation, float logProbability, RowOutputs outputs) =>
            outputs.Values(First + 1)[continuation] += logProbability;
    }
}
