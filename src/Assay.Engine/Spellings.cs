using Assay.Features;
using Assay.Input;
using Assay.Output;
using Assay.Weights;

namespace Assay;

/// <summary>
/// The one written form of each option value, shared by the command line (what it parses) and the run record (what
/// it writes), so a value is spelled the same wherever a user meets it.
/// </summary>
public static class Spellings
{
    /// <summary>auto, lines, jsonl, csv, tsv.</summary>
    public static string Of(InputFormat format) => format switch
    {
        InputFormat.Lines => "lines",
        InputFormat.JsonLines => "jsonl",
        InputFormat.Csv => "csv",
        InputFormat.Tsv => "tsv",
        _ => "auto",
    };

    /// <summary>head, tail (which end of an over-long text is kept).</summary>
    public static string Of(TextTruncation truncation) => truncation == TextTruncation.KeepTail ? "tail" : "head";

    /// <summary>float32, bfloat16, int8 (how the weights are held).</summary>
    public static string Of(WeightPrecision precision) => precision switch
    {
        WeightPrecision.BFloat16 => "bfloat16",
        WeightPrecision.Integer8 => "int8",
        _ => "float32",
    };

    /// <summary>float32, float16 (how floating features are stored).</summary>
    public static string Of(FeaturePrecision precision) => precision == FeaturePrecision.Binary16 ? "float16" : "float32";

    /// <summary>auto, always, never (whether sequences start with the beginning-of-sequence token).</summary>
    public static string Of(Tokenization.BeginningOfSequence policy) => policy switch
    {
        Tokenization.BeginningOfSequence.Always => "always",
        Tokenization.BeginningOfSequence.Never => "never",
        _ => "auto",
    };

    /// <summary>The value of <typeparamref name="T"/> spelled <paramref name="text"/>.</summary>
    /// <exception cref="ArgumentException">No value is spelled so; the message names <paramref name="option"/> and the spellings.</exception>
    public static T Parse<T>(string option, string text) where T : struct, Enum
    {
        ArgumentNullException.ThrowIfNull(text);
        T[] values = Enum.GetValues<T>();
        foreach (T value in values)
        {
            if (Spelling(value) == text)
            {
                return value;
            }
        }
        string[] all = [.. values.Select(Spelling)];
        throw new ArgumentException($"{option} {text}: expected {string.Join(", ", all[..^1])} or {all[^1]}");
    }

    private static string Spelling<T>(T value) where T : struct, Enum => value switch
    {
        InputFormat f => Of(f),
        TextTruncation t => Of(t),
        WeightPrecision w => Of(w),
        FeaturePrecision p => Of(p),
        Tokenization.BeginningOfSequence b => Of(b),
        _ => throw new ArgumentException($"{typeof(T).Name} has no written form", nameof(value)),
    };
}
