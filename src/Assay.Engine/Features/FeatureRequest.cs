using System.Globalization;

namespace Assay.Features;

/// <summary>Which token positions a hidden-state feature summarizes.</summary>
public enum HiddenPooling
{
    /// <summary>The last token of the filled template (the position that predicts the next word).</summary>
    LastToken,

    /// <summary>The mean over every token of the filled template, prompt included.</summary>
    Mean,

    /// <summary>The token just before the template's <c>{mark}</c>.</summary>
    Marked,
}

/// <summary>One kind of feature an extraction computes for every row. Each writes one or two arrays (see <see cref="FeatureOutput"/>).</summary>
public abstract record FeatureRequest
{
    private protected FeatureRequest()
    {
    }

    /// <summary>The canonical spelling of the request, as <c>assay extract --features</c> takes it.</summary>
    public abstract string Spec { get; }
}

/// <summary>
/// The hidden state of layer <see cref="Layer"/> (0 = embeddings, k = after block k, L = after the final norm),
/// pooled over positions. A negative layer counts from the end: −1 is L.
/// </summary>
public sealed record HiddenStateFeature(int Layer, HiddenPooling Pooling = HiddenPooling.LastToken) : FeatureRequest
{
    /// <inheritdoc/>
    public override string Spec => string.Create(CultureInfo.InvariantCulture, $"hidden:{Layer}:{PoolingName(Pooling)}");

    internal static string PoolingName(HiddenPooling pooling) => pooling switch
    {
        HiddenPooling.Mean => "mean",
        HiddenPooling.Marked => "mark",
        _ => "last",
    };
}

/// <summary>The next-word distribution p after the filled template, over the whole vocabulary (V values a row).</summary>
public sealed record NextWordFeature : FeatureRequest
{
    /// <inheritdoc/>
    public override string Spec => "nextword";
}

/// <summary>The <see cref="Count"/> most likely next tokens: their ids and probabilities, most likely first (ties by lower id).</summary>
public sealed record TopTokensFeature(int Count) : FeatureRequest
{
    /// <inheritdoc/>
    public override string Spec => string.Create(CultureInfo.InvariantCulture, $"topk:{Count}");
}

/// <summary>
/// For each word of a list: the probability of its first token as the next token and, when
/// <see cref="FullLogLikelihood"/>, the log-likelihood of all its tokens as the continuation (natural log).
/// </summary>
public sealed record WordListFeature(IReadOnlyList<string> Words, bool FullLogLikelihood = false) : FeatureRequest
{
    /// <inheritdoc/>
    public override string Spec => FullLogLikelihood ? "words-loglik" : "words";
}

/// <summary>
/// The conditional-mean feature Φp = Σ_v p_v·E_v: the output-embedding matrix times the next-word distribution,
/// d values a row. Computed from p in memory; p itself is not written unless <see cref="NextWordFeature"/> is asked for too.
/// </summary>
public sealed record ConditionalMeanFeature : FeatureRequest
{
    /// <inheritdoc/>
    public override string Spec => "cmean";
}

/// <summary>The log-likelihood (natural log, summed over its tokens) of each candidate completion after the filled template.</summary>
public sealed record CompletionFeature(IReadOnlyList<string> Candidates) : FeatureRequest
{
    /// <inheritdoc/>
    public override string Spec => "completions";
}
