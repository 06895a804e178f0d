using System.Text.Json.Nodes;

namespace Assay.Features;

/// <summary>
/// One kind of feature an extraction computes for every row. A kind owns its spelling (<see cref="Spec"/>, and its
/// parser in <see cref="FeatureSpec"/>), the arrays it writes, what it needs from the forward pass, and its compute
/// step; the extractor only schedules what the kinds ask for.
/// </summary>
public abstract record FeatureRequest
{
    private protected FeatureRequest()
    {
    }

    /// <summary>The canonical spelling of the request, as <c>assay extract --features</c> takes it.</summary>
    public abstract string Spec { get; }

    /// <summary>The arrays the kind writes for a model of shape <paramref name="shape"/>, in order.</summary>
    /// <exception cref="ArgumentException">The request does not fit the model (a layer out of range, k over the vocabulary).</exception>
    internal abstract IReadOnlyList<FeatureOutput> Outputs(ModelShape shape);

    /// <summary>Which of <see cref="Outputs"/> stands for the kind where one array is asked for (a probe's feature): the first, unless the kind says otherwise.</summary>
    internal virtual int PrimaryOutput => 0;

    /// <summary>The kind's compute step for one extraction, writing the outputs from <paramref name="firstOutput"/> on.</summary>
    /// <exception cref="ArgumentException">The request does not fit the prompt or its words have no tokens.</exception>
    internal abstract FeatureStep Bind(FeatureBinding binding, int firstOutput);

    /// <summary>The kind's entry in a run record: its spelling and whatever else decides its values (word lists).</summary>
    internal virtual JsonObject Describe() => new() { ["spec"] = Spec };
}
