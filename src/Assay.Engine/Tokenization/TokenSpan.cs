namespace Assay.Tokenization;

/// <summary>One token of a text: its id, its text as the vocabulary spells it, and the UTF-8 byte range [ByteStart, ByteEnd) of the text it came from.</summary>
public sealed record TokenSpan(int Id, string Text, int ByteStart, int ByteEnd);
