using System.Globalization;

namespace Assay.Features;

/// <summary>
/// The <see cref="Count"/> most likely next tokens: their ids and probabilities, most likely first (ties by lower id).
/// Spelled <c>topk:K</c>; writes <c>topk{K}.ids</c> (int32) and <c>topk{K}.probs</c>.
/// </summary>
public sealed record TopTokensFeature(int Count) : FeatureRequest
{
    internal const string Name = "topk";

    internal const string Syntax = "topk:K";

    /// <inheritdoc/>
    public override string Spec => string.Create(CultureInfo.InvariantCulture, $"topk:{Count}");

    internal static IEnumerable<FeatureRequest> Parse(FeatureSpec.Item item)
    {
        if (item.Parts.Length != 2)
        {
            throw item.Unknown();
        }
        int k = item.Integer(item.Parts[1]);
        return k >= 1 ? [new TopTokensFeature(k)] : throw item.Error($"expected a positive number, found {item.Parts[1]}");
    }

    internal override IReadOnlyList<FeatureOutput> Outputs(ModelShape shape)
    {
        if (Count < 1 || Count > shape.VocabularySize)
        {
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture, $"topk:{Count}: expected 1 … {shape.VocabularySize} (the vocabulary)"));
        }
        string name = string.Create(CultureInfo.InvariantCulture, $"topk{Count}");
        return [new FeatureOutput(name + ".ids", Count, FeatureElement.TokenId, this), new FeatureOutput(name + ".probs", Count, FeatureElement.Real, this)];
    }

    /// <summary>The probabilities (the ids are labels, not features).</summary>
    internal override int PrimaryOutput => 1;

    internal override FeatureStep Bind(FeatureBinding binding, int firstOutput) => new Step(firstOutput, Count);

    private sealed class Step(int first, int k) : FeatureStep(first)
    {
        public override bool NeedsDistribution => true;

        /// <summary>The k largest probabilities, descending; equal probabilities by ascending id.</summary>
        protected override void FromDistribution(ReadOnlySpan<float> p, RowOutputs outputs)
        {
            int[] ids = outputs.Ids(First);
            float[] probabilities = outputs.Values(First + 1);
            // A min-heap of the best k so far, whose root is the weakest: lower probability, or higher id at a tie.
            var heap = new PriorityQueue<int, (float P, int Id)>(k, WeakestFirst.Instance);
            for (int id = 0; id < p.Length; id++)
            {
                if (heap.Count < k)
                {
                    heap.Enqueue(id, (p[id], id));
                }
                else
                {
                    heap.TryPeek(out _, out (float P, int Id) weakest);
                    if (p[id] > weakest.P)
                    {
                        heap.DequeueEnqueue(id, (p[id], id));
                    }
                }
            }
            for (int i = k - 1; i >= 0; i--)
            {
                heap.TryDequeue(out int id, out (float P, int Id) key);
                ids[i] = id;
                probabilities[i] = key.P;
            }
        }
    }

    private sealed class WeakestFirst : IComparer<(float P, int Id)>
    {
        public static readonly WeakestFirst Instance = new();

        public int Compare((float P, int Id) a, (float P, int Id) b) =>
            a.P != b.P ? a.P.CompareTo(b.P) : b.Id.CompareTo(a.Id);
    }
}
