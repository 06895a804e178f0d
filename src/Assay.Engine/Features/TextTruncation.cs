namespace Assay.Features;

/// <summary>Which end of a text survives when text and prompt do not fit in the context.</summary>
public enum TextTruncation
{
    /// <summary>Keep the first tokens of the text, drop its end.</summary>
    KeepHead,

    /// <summary>Keep the last tokens of the text, drop its start.</summary>
    KeepTail,
}
