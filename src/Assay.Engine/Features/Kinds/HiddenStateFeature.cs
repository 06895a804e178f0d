using System.Globalization;
using System.Numerics.Tensors;
using Assay.Model;

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

/// <summary>
/// The hidden state of layer <see cref="Layer"/> (0 = embeddings, k = after block k, L = after the final norm),
/// pooled over positions. A negative layer counts from the end: −1 is L.
/// Spelled <c>hidden[:LAYER|all][:last|mean|mark]</c>; <c>hidden:all</c> is one request per layer 0 … L.
/// </summary>
public sealed record HiddenStateFeature(int Layer, HiddenPooling Pooling = HiddenPooling.LastToken) : FeatureRequest
{
    internal const string Name = "hidden";

    internal const string Syntax = "hidden[:LAYER|all][:last|mean|mark]";

    /// <inheritdoc/>
    public override string Spec => string.Create(CultureInfo.InvariantCulture, $"hidden:{Layer}:{PoolingName(Pooling)}");

    /// <summary>The layer index 0 … <paramref name="layers"/> that <paramref name="layer"/> names (negative: from the end, −1 = L).</summary>
    /// <exception cref="ArgumentException">The layer is outside −(L + 1) … L.</exception>
    public static int ResolveLayer(int layer, int layers)
    {
        int resolved = layer < 0 ? layers + 1 + layer : layer;
        return resolved >= 0 && resolved <= layers ? resolved
            : throw new ArgumentException(string.Create(CultureInfo.InvariantCulture,
                $"hidden layer {layer}: this model has layers 0 … {layers} (or −1 … −{layers + 1} from the end)"));
    }

    internal static string PoolingName(HiddenPooling pooling) => pooling switch
    {
        HiddenPooling.Mean => "mean",
        HiddenPooling.Marked => "mark",
        _ => "last",
    };

    /// <summary>Parses <c>hidden[:LAYER|all][:POOLING]</c>.</summary>
    internal static IEnumerable<FeatureRequest> Parse(FeatureSpec.Item item)
    {
        string[] parts = item.Parts;
        if (parts.Length > 3)
        {
            throw item.Error("has too many parts; write hidden:LAYER:POOLING");
        }
        HiddenPooling pooling = parts.Length < 3 ? HiddenPooling.LastToken
            : PoolingNamed(parts[2]) ?? throw item.Error($"pooling \"{parts[2]}\" is not last, mean or mark");
        if (parts.Length == 2 && PoolingNamed(parts[1]) is HiddenPooling only)
        {
            // hidden:mean, hidden:last, hidden:mark: the default layer (L) with that pooling.
            return [new HiddenStateFeature(-1, only)];
        }
        if (parts.Length >= 2 && parts[1] == "all")
        {
            return Enumerable.Range(0, item.Layers + 1).Select(l => new HiddenStateFeature(l, pooling));
        }
        int layer = parts.Length >= 2 && parts[1].Length > 0 ? item.Integer(parts[1]) : -1;
        return [new HiddenStateFeature(layer, pooling)];
    }

    private static HiddenPooling? PoolingNamed(string name) => name switch
    {
        "last" => HiddenPooling.LastToken,
        "mean" => HiddenPooling.Mean,
        "mark" => HiddenPooling.Marked,
        _ => null,
    };

    internal override IReadOnlyList<FeatureOutput> Outputs(ModelShape shape)
    {
        int layer = ResolveLayer(Layer, shape.Layers);
        return [new FeatureOutput(string.Create(CultureInfo.InvariantCulture, $"hidden.layer{layer}.{PoolingName(Pooling)}"), shape.Width, FeatureElement.Real, this)];
    }

    internal override FeatureStep Bind(FeatureBinding binding, int firstOutput)
    {
        if (Pooling == HiddenPooling.Marked && !binding.Options.Prompt.HasMark)
        {
            throw new ArgumentException($"{Spec} reads the token before {{mark}}, but the prompt \"{binding.Options.Prompt.Source}\" has no {{mark}}");
        }
        return new Step(firstOutput, ResolveLayer(Layer, binding.Model.Config.Layers), Pooling);
    }

    private sealed class Step(int first, int layer, HiddenPooling pooling) : FeatureStep(first)
    {
        public override IEnumerable<int> Layers => [layer];

        public override void FromHidden(ForwardResult result, int sequence, PreparedRow row, RowOutputs outputs)
        {
            Span<float> dst = outputs.Values(First);
            switch (pooling)
            {
                case HiddenPooling.LastToken:
                    result.HiddenState(layer, sequence, result.Length(sequence) - 1).CopyTo(dst);
                    break;
                case HiddenPooling.Marked:
                    result.HiddenState(layer, sequence, row.MarkPosition).CopyTo(dst);
                    break;
                default:
                {
                    dst.Clear();
                    int length = result.Length(sequence);
                    for (int t = 0; t < length; t++)
                    {
                        TensorPrimitives.Add(dst, result.HiddenState(layer, sequence, t), dst);
                    }
                    TensorPrimitives.Multiply(dst, 1f / length, dst);
                    break;
                }
            }
        }
    }
}
