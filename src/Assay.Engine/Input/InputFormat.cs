namespace Assay.Input;

/// <summary>How an input file holds its texts.</summary>
public enum InputFormat
{
    /// <summary>From the file name: .jsonl/.ndjson, .csv, .tsv; anything else is plain lines.</summary>
    Auto,

    /// <summary>One text per line (UTF-8, LF or CRLF).</summary>
    Lines,

    /// <summary>One JSON object per line, the text in a string field.</summary>
    JsonLines,

    /// <summary>Comma-separated values with a header row (RFC 4180 quoting).</summary>
    Csv,

    /// <summary>Tab-separated values with a header row.</summary>
    Tsv,
}
