using Assay.Model;

namespace Assay.Features;

/// <summary>
/// The conditional-mean feature Φp = Σ_v p_v·E_v: the output-embedding matrix times the next-word distribution,
/// d values a row. Computed from p in memory; p itself is not written unless <see cref="NextWordFeature"/> is asked
/// for too. Spelled <c>cmean</c>.
/// </summary>
public sealed record ConditionalMeanFeature : FeatureRequest
{
    internal const string Name = "cmean";

    /// <inheritdoc/>
    public override string Spec => Name;

    internal static IEnumerable<FeatureRequest> Parse(FeatureSpec.Item item) => item.Bare(() => new ConditionalMeanFeature());

    internal override IReadOnlyList<FeatureOutput> Outputs(ModelShape shape) => [new FeatureOutput("cmean", shape.Width, FeatureElement.Real, this)];

    internal override FeatureStep Bind(FeatureBinding binding, int firstOutput) => new Step(firstOutput);

    private sealed class Step(int first) : FeatureStep(first)
    {
        public override bool NeedsDistribution => true;

        /// <summary>Φp of the whole slice in one pass over the head, which streams it once per slice rather than once per row.</summary>
        public override void FromDistributions(ReadOnlySpan<float> p, int count, ReadOnlySpan<RowOutputs> rows, OutputHead head, ParallelOptions parallel)
        {
            int d = head.Width;
            float[] phi = new float[count * d];
            head.ConditionalMean(p, count, phi, parallel);
            for (int i = 0; i < count; i++)
            {
                phi.AsSpan(i * d, d).CopyTo(rows[i].Values(First));
            }
        }
    }
}
