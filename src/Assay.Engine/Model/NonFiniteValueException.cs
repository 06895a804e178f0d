using System.Globalization;

namespace Assay.Model;

/// <summary>
/// A forward pass produced a NaN or an infinity: the weights hold values a float32 pass cannot carry (finite but huge
/// ones overflow). Every pass checks the residual stream after the embeddings and after each block, and the logits,
/// and stops at the first such value with the layer, the sequence and the token; a feature file never holds one.
/// </summary>
public sealed class NonFiniteValueException : InvalidInputException
{
    private NonFiniteValueException(string modelFolder, string stage, float value, int sequence, int position, long? text, string? row)
        : base(modelFolder, Compose(modelFolder, stage, value, sequence, position, text, row))
    {
        Stage = stage;
        Value = value;
        Sequence = sequence;
        Position = position;
        Text = text;
    }

    /// <summary>Where the value appeared: "layer N" (the residual stream after N blocks; 0 = the embeddings) or "the logits".</summary>
    public string Stage { get; }

    /// <summary>The value: NaN, +∞ or −∞.</summary>
    public float Value { get; }

    /// <summary>The sequence of the batch given to the forward pass, 0-based.</summary>
    public int Sequence { get; }

    /// <summary>The token position in that sequence, 0-based.</summary>
    public int Position { get; }

    /// <summary>For a feature extraction: the text's index in the extraction, 0-based; otherwise null.</summary>
    public long? Text { get; }

    /// <summary>The first non-finite value of <paramref name="values"/> (rows of <paramref name="width"/>), as a row index and value, or null.</summary>
    internal static (int Row, float Value)? Find(ReadOnlySpan<float> values, int width)
    {
        int i = NonFinite.First(values);
        return i < 0 ? null : (i / width, values[i]);
    }

    /// <summary>Checks the rows of a forward pass's stage; the row is a token of the batch laid end to end.</summary>
    internal static void Check(ReadOnlySpan<float> values, int width, string stage, int[] starts, int[] lengths, string modelFolder)
    {
        if (Find(values, width) is (int token, float value))
        {
            int s = Array.FindLastIndex(starts, start => start <= token);
            throw new NonFiniteValueException(modelFolder, stage, value, s, token - starts[s], null, null);
        }
    }

    /// <summary>Checks logits rows whose sequence and position the caller gives.</summary>
    internal static void CheckRows(ReadOnlySpan<float> values, int width, Func<int, (int Sequence, int Position)> where, string modelFolder)
    {
        if (Find(values, width) is (int row, float value))
        {
            (int s, int p) = where(row);
            throw new NonFiniteValueException(modelFolder, "the logits", value, s, p, null, null);
        }
    }

    /// <summary>The same value, placed in an extraction: the text's index.</summary>
    internal NonFiniteValueException InText(long text) => new(FilePath, Stage, Value, Sequence, Position, text, null);

    /// <summary>The same value, placed in an input file's record (its line and id).</summary>
    internal NonFiniteValueException InRecord(string record) => new(FilePath, Stage, Value, Sequence, Position, Text, record);

    private static string Compose(string folder, string stage, float value, int sequence, int position, long? text, string? row)
    {
        string what = float.IsNaN(value) ? "NaN" : value > 0 ? "+infinity" : "-infinity";
        string where = row ?? (text is long t ? string.Create(CultureInfo.InvariantCulture, $"text {t + 1} of the extraction") : string.Create(CultureInfo.InvariantCulture, $"sequence {sequence} of the batch"));
        return string.Create(CultureInfo.InvariantCulture,
            $"{folder}: the forward pass gave {what} in {stage} at token {position} of {where}; the weights hold values a float32 pass cannot carry (assay inspect checks every tensor)");
    }
}
