namespace Assay.Features;

/// <summary>The next-word distribution p after the filled template, over the whole vocabulary (V values a row). Spelled <c>nextword</c>.</summary>
public sealed record NextWordFeature : FeatureRequest
{
    internal const string Name = "nextword";

    /// <inheritdoc/>
    public override string Spec => Name;

    internal static IEnumerable<FeatureRequest> Parse(FeatureSpec.Item item) => item.Bare(() => new NextWordFeature());

    internal override IReadOnlyList<FeatureOutput> Outputs(ModelShape shape) =>
        [new FeatureOutput("nextword", shape.VocabularySize, FeatureElement.Real, this)];

    internal override FeatureStep Bind(FeatureBinding binding, int firstOutput) => new Step(firstOutput);

    private sealed class Step(int first) : FeatureStep(first)
    {
        public override bool NeedsDistribution => true;

        protected override void FromDistribution(ReadOnlySpan<float> p, RowOutputs outputs) => p.CopyTo(outputs.Values(First));
    }
}
