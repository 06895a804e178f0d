namespace Assay.Input;

/// <summary>One record of an input file: accepted, with its text, id and label, or rejected with the reason.</summary>
/// <param name="Line">The 1-based line where the record starts.</param>
/// <param name="Text">The text; null when rejected.</param>
/// <param name="Id">The id (the line number when the input has none).</param>
/// <param name="Label">The label, or empty.</param>
/// <param name="Rejection">Why the record was rejected; null when accepted.</param>
public sealed record InputRecord(long Line, string? Text, string Id, string Label, string? Rejection)
{
    /// <summary>Whether the record was accepted.</summary>
    public bool Accepted => Rejection == null;
}
