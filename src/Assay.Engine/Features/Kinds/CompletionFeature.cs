using System.Text.Json.Nodes;

namespace Assay.Features;

/// <summary>
/// The log-likelihood (natural log, summed over its tokens) of each candidate completion after the filled template.
/// Spelled <c>completions</c>; the candidates come from the caller's list named "completions".
/// </summary>
public sealed record CompletionFeature(IReadOnlyList<string> Candidates) : FeatureRequest
{
    internal const string Name = "completions";

    /// <summary>The name of the item list the candidates come from (<see cref="FeatureSpec.Parse"/>).</summary>
    public const string ListName = "completions";

    /// <inheritdoc/>
    public override string Spec => Name;

    internal static IEnumerable<FeatureRequest> Parse(FeatureSpec.Item item) => item.Bare(() => new CompletionFeature(item.List(ListName)));

    internal override IReadOnlyList<FeatureOutput> Outputs(ModelShape shape) =>
        [new FeatureOutput("completions.loglik", Candidates.Count, FeatureElement.Real, this)];

    internal override FeatureStep Bind(FeatureBinding binding, int firstOutput) =>
        new Step(firstOutput, binding.EncodeAll(Candidates, "candidate completion"));

    internal override JsonObject Describe()
    {
        JsonObject o = base.Describe();
        o["candidates"] = new JsonArray([.. Candidates.Select(s => JsonValue.Create(s))]);
        return o;
    }

    private sealed class Step(int first, int[][] continuations) : FeatureStep(first)
    {
        public override IReadOnlyList<int[]> Continuations => continuations;

        public override void AddLogProbability(int continuation, float logProbability, RowOutputs outputs) =>
            outputs.Values(First)[continuation] += logProbability;
    }
}
