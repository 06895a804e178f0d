namespace Assay.Input;

/// <summary>Which fields or columns of JSONL, CSV and TSV input hold the text, the row id and the label (names checked non-empty as they are set).</summary>
public sealed record InputFields
{
    /// <summary>The text field. Required in every record.</summary>
    public string Text { get; init => field = !string.IsNullOrEmpty(value) ? value : throw new ArgumentException("a field name cannot be empty", nameof(Text)); } = "text";

    /// <summary>The id field. When <see cref="IdRequired"/> is off, a record without it gets its line number.</summary>
    public string Id { get; init => field = !string.IsNullOrEmpty(value) ? value : throw new ArgumentException("a field name cannot be empty", nameof(Id)); } = "id";

    /// <summary>The label field. When <see cref="LabelRequired"/> is off, a record without it gets an empty label.</summary>
    public string Label { get; init => field = !string.IsNullOrEmpty(value) ? value : throw new ArgumentException("a field name cannot be empty", nameof(Label)); } = "label";

    /// <summary>Reject records that lack the id field (set when the user names the field).</summary>
    public bool IdRequired { get; init; }

    /// <summary>Reject records that lack the label field (set when the user names the field).</summary>
    public bool LabelRequired { get; init; }
}
