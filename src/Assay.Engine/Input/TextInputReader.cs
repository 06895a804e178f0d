using System.Globalization;
using System.Text;
using System.Text.Json;
using System.Text.Unicode;
using CsvHelper;

namespace Assay.Input;

/// <summary>
/// Reads the records of a text input file in order, never stopping at a bad one: invalid UTF-8, an empty text, a
/// line over <see cref="MaxRecordBytes"/>, malformed JSON, a missing field, or a CSV row with the wrong field count
/// comes out as a rejected record with its line number and reason. CSV and TSV go through CsvHelper.
/// </summary>
public sealed class TextInputReader : IDisposable
{
    /// <summary>
    /// The longest record accepted, in bytes (a line without its line break; a CSV/TSV record's field text); longer
    /// ones are rejected and the run goes on.
    /// </summary>
    public const int MaxRecordBytes = 1 << 20;

    /// <summary>
    /// A CSV/TSV record whose raw bytes grow past this before it ends stops the reading: it is almost always a quote
    /// never closed, which would otherwise swallow the rest of the file into one field.
    /// </summary>
    public const int MaxRawCsvRecordBytes = 64 << 20;

    /// <summary>Deepest JSON nesting accepted on one line.</summary>
    private const int MaxJsonDepth = 64;

    /// <summary>The path that names standard input.</summary>
    public const string StandardInput = "-";

    private readonly Stream _source;
    private readonly CountingStream _stream;
    private readonly long? _length;
    private readonly InputFields _fields;

    private TextInputReader(string path, InputFormat format, InputFields fields, Stream source, long? length)
    {
        Path = path;
        Format = format;
        _fields = fields;
        _source = source;
        _length = length;
        _stream = new CountingStream(source, hash: length == null);
    }

    /// <summary>The file (<see cref="StandardInput"/> for standard input).</summary>
    public string Path { get; }

    /// <summary>The format read (never Auto).</summary>
    public InputFormat Format { get; }

    /// <summary>True when the input is a pipe (standard input or a FIFO): read once, its size unknown until the end.</summary>
    public bool IsStream => _length == null;

    /// <summary>The file's size in bytes; for a stream, the bytes read so far.</summary>
    public long TotalBytes => _length ?? _stream.Count;

    /// <summary>Bytes read so far (for progress; reads run ahead of the records returned by up to a buffer).</summary>
    public long BytesRead => _stream.Count;

    /// <summary>The share of the file read, 0 … 1; null for a stream, whose size is not known.</summary>
    public double? Fraction => _length is long n ? (n == 0 ? 1 : Math.Min(1.0, (double)_stream.Count / n)) : null;

    /// <summary>A stream's SHA-256 (lower-case hexadecimal) over every byte read; complete once the records are read to the end.</summary>
    /// <exception cref="InvalidOperationException">The input is a file (hash it with its path).</exception>
    public string StreamSha256() => _stream.Sha256();

    /// <summary>
    /// Opens an input: a regular file, a FIFO, or <see cref="StandardInput"/>. A FIFO or standard input is read once
    /// as it comes (no seeking: its runs cannot resume, and its progress has no share of the input).
    /// </summary>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    /// <exception cref="InputFileException">The path is a folder, a device, a socket or a symbolic link loop.</exception>
    /// <exception cref="TextInputException">The input starts with a UTF-16 byte-order mark.</exception>
    public static TextInputReader Open(string path, InputFormat format = InputFormat.Auto, InputFields? fields = null)
    {
        ArgumentNullException.ThrowIfNull(path);
        format = format == InputFormat.Auto ? FormatOf(path) : format;
        fields ??= new InputFields();
        TextInputReader reader;
        if (path == StandardInput)
        {
            reader = new TextInputReader(path, format, fields, Console.OpenStandardInput(1 << 16), null);
        }
        else if (Check(path))
        {
            reader = new TextInputReader(path, format, fields, new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, 1 << 16), null);
        }
        else
        {
            var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, 1 << 16, FileOptions.SequentialScan);
            reader = new TextInputReader(path, format, fields, file, file.Length);
        }
        try
        {
            reader.RefuseUtf16();
            return reader;
        }
        catch
        {
            reader.Dispose();
            throw;
        }
    }

    /// <summary>Refuses what cannot be an input (nothing there, a folder, a device, a socket, a link loop); true for a pipe.</summary>
    /// <exception cref="FileNotFoundException">Nothing is there.</exception>
    /// <exception cref="InputFileException">A folder, a device, a socket or a symbolic link loop.</exception>
    public static bool Check(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        if (path == StandardInput)
        {
            return true;
        }
        if (!File.Exists(path) && !Directory.Exists(path) && !IsLink(path))
        {
            throw new FileNotFoundException($"{path}: no such input file", path);
        }
        return InputFile.NotRegular(path) switch
        {
            null => false,
            InputFile.Fifo => true,
            string what => throw new InputFileException(path, $"{path}: {what}; an input is a regular file, a FIFO or - (standard input)"),
        };
    }

    private static bool IsLink(string path) => new FileInfo(path).LinkTarget != null;

    /// <summary>UTF-16 text read as UTF-8 would be NUL-riddled records: refused by its byte-order mark.</summary>
    private void RefuseUtf16()
    {
        ReadOnlySpan<byte> start = _stream.Peek(2);
        if (start is [0xFF, 0xFE] or [0xFE, 0xFF])
        {
            throw new TextInputException(Path, 0, $"UTF-16 text (byte-order mark {start[0]:X2} {start[1]:X2}); inputs are UTF-8: convert it (e.g. iconv -f UTF-16 -t UTF-8)");
        }
    }

    /// <summary>The format a file name implies.</summary>
    public static InputFormat FormatOf(string path) => System.IO.Path.GetExtension(path).ToUpperInvariant() switch
    {
        ".JSONL" or ".NDJSON" => InputFormat.JsonLines,
        ".CSV" => InputFormat.Csv,
        ".TSV" or ".TAB" => InputFormat.Tsv,
        _ => InputFormat.Lines,
    };

    /// <summary>The records, in file order.</summary>
    /// <exception cref="TextInputException">A CSV/TSV header lacks a required column, or a CSV record exceeds the size cap.</exception>
    public IEnumerable<InputRecord> Records() => Format switch
    {
        InputFormat.Lines => LineRecords(json: false),
        InputFormat.JsonLines => LineRecords(json: true),
        _ => DelimitedRecords(Format == InputFormat.Tsv ? '\t' : ','),
    };

    /// <inheritdoc/>
    public void Dispose()
    {
        _stream.Dispose();
        _source.Dispose();
    }

    private IEnumerable<InputRecord> LineRecords(bool json)
    {
        long line = 0;
        foreach ((byte[]? bytes, bool tooLong) in SplitLines(_stream))
        {
            line++;
            if (tooLong)
            {
                yield return Reject(line, string.Create(CultureInfo.InvariantCulture, $"line is longer than {MaxRecordBytes:N0} bytes"));
                continue;
            }
            ReadOnlySpan<byte> content = bytes;
            if (line == 1 && content.StartsWith("\uFEFF"u8))
            {
                content = content[3..];
            }
            if (!Utf8.IsValid(content))
            {
                yield return Reject(line, "not valid UTF-8");
                continue;
            }
            yield return json ? JsonRecord(line, content) : PlainRecord(line, content);
        }
    }

    private static InputRecord PlainRecord(long line, ReadOnlySpan<byte> content)
    {
        string text = Encoding.UTF8.GetString(content);
        return string.IsNullOrWhiteSpace(text)
            ? Reject(line, "empty text")
            : new InputRecord(line, text, line.ToString(CultureInfo.InvariantCulture), "", null);
    }

    private InputRecord JsonRecord(long line, ReadOnlySpan<byte> content)
    {
        if (content.Trim(" \t"u8).IsEmpty)
        {
            return Reject(line, "empty line");
        }
        JsonDocument? document = JsonInput.TryParse(content.ToArray(), MaxJsonDepth, out string parseProblem);
        if (document == null)
        {
            return Reject(line, parseProblem);
        }
        using (document)
        {
            JsonElement root = document.RootElement;
            if (root.ValueKind != JsonValueKind.Object)
            {
                return Reject(line, $"expected a JSON object, found {root.ValueKind.ToString().ToLowerInvariant()}");
            }
            if (!root.TryGetProperty(_fields.Text, out JsonElement textElement))
            {
                return Reject(line, $"no \"{_fields.Text}\" field");
            }
            if (textElement.ValueKind != JsonValueKind.String)
            {
                return Reject(line, $"field \"{_fields.Text}\" is {textElement.ValueKind.ToString().ToLowerInvariant()}, not a string");
            }
            string text = textElement.GetString()!;
            if (string.IsNullOrWhiteSpace(text))
            {
                return Reject(line, "empty text");
            }
            if (!TryScalar(root, _fields.Id, _fields.IdRequired, line.ToString(CultureInfo.InvariantCulture), out string id, out string? problem)
                || !TryScalar(root, _fields.Label, _fields.LabelRequired, "", out string label, out problem))
            {
                return Reject(line, problem!);
            }
            return new InputRecord(line, text, id, label, null);
        }
    }

    /// <summary>A string, number or boolean field as text (numbers as written in the file).</summary>
    private static bool TryScalar(JsonElement root, string name, bool required, string fallback, out string value, out string? problem)
    {
        problem = null;
        if (!root.TryGetProperty(name, out JsonElement e) || e.ValueKind == JsonValueKind.Null)
        {
            value = fallback;
            problem = required ? $"no \"{name}\" field" : null;
            return !required;
        }
        switch (e.ValueKind)
        {
            case JsonValueKind.String:
                value = e.GetString()!;
                return true;
            case JsonValueKind.Number:
            case JsonValueKind.True:
            case JsonValueKind.False:
                value = e.GetRawText();
                return true;
            default:
                value = fallback;
                problem = $"field \"{name}\" is {e.ValueKind.ToString().ToLowerInvariant()}; expected a string, number or boolean";
                return false;
        }
    }

    private IEnumerable<InputRecord> DelimitedRecords(char separator)
    {
        var skipped = new Queue<InputRecord>();
        var options = new CsvReaderOptions
        {
            Separator = separator,
            HasHeader = true,
            TrackLineNumbers = true,
            MalformedData = CsvMalformedDataHandling.Skip,
            FieldCountMismatch = CsvFieldCountHandling.Skip,
            MaxRecordSize = MaxRawCsvRecordBytes,
            OnMalformedRecord = m => skipped.Enqueue(Reject(m.LineNumber, Describe(m.Reason))),
        };
        using CsvReader csv = CsvReader.Create(_stream, options, leaveOpen: true);
        int textColumn = -1, idColumn = -1, labelColumn = -1;
        while (true)
        {
            bool more;
            try
            {
                if (textColumn < 0)
                {
                    csv.ReadHeader();
                    textColumn = Column(csv, _fields.Text, required: true);
                    idColumn = Column(csv, _fields.Id, _fields.IdRequired);
                    labelColumn = Column(csv, _fields.Label, _fields.LabelRequired);
                }
                more = csv.Read();
            }
            catch (CsvFormatException e)
            {
                throw new TextInputException(Path, e.LineNumber, e.Message.Contains("MaxRecordSize", StringComparison.Ordinal)
                    ? string.Create(CultureInfo.InvariantCulture, $"a record longer than {MaxRawCsvRecordBytes:N0} bytes (a quote that is never closed?); the reading stops here")
                    : e.Message);
            }
            while (skipped.Count > 0)
            {
                yield return skipped.Dequeue();
            }
            if (!more)
            {
                yield break;
            }
            yield return DelimitedRecord(csv, textColumn, idColumn, labelColumn);
        }
    }

    private static InputRecord DelimitedRecord(CsvReader csv, int textColumn, int idColumn, int labelColumn)
    {
        long line = csv.LineNumber;
        long bytes = 0;
        for (int i = 0; i < csv.FieldCount; i++)
        {
            bytes += csv.GetSpan(i).Length;
        }
        if (bytes > MaxRecordBytes)
        {
            return Reject(line, string.Create(CultureInfo.InvariantCulture, $"record is longer than {MaxRecordBytes:N0} bytes ({bytes:N0} bytes of field text)"));
        }
        string? text = Field(csv, textColumn), id = Field(csv, idColumn), label = Field(csv, labelColumn);
        if (text == null || (idColumn >= 0 && id == null) || (labelColumn >= 0 && label == null))
        {
            return Reject(line, "not valid UTF-8");
        }
        if (string.IsNullOrWhiteSpace(text))
        {
            return Reject(line, "empty text");
        }
        return new InputRecord(line, text, idColumn >= 0 ? id! : line.ToString(CultureInfo.InvariantCulture),
            labelColumn >= 0 ? label! : "", null);
    }

    /// <summary>A field as a string, or null when its bytes are not valid UTF-8.</summary>
    private static string? Field(CsvReader csv, int column)
    {
        if (column < 0)
        {
            return "";
        }
        ReadOnlySpan<byte> bytes = csv.GetSpan(column);
        return Utf8.IsValid(bytes) ? Encoding.UTF8.GetString(bytes) : null;
    }

    private int Column(CsvReader csv, string name, bool required)
    {
        for (int i = 0; i < csv.Headers.Count; i++)
        {
            if (string.Equals(csv.Headers[i], name, StringComparison.Ordinal))
            {
                return i;
            }
        }
        if (required)
        {
            throw new TextInputException(Path, 1,
                $"the header has no column \"{name}\"; its columns are {string.Join(", ", csv.Headers.Select(h => "\"" + h + "\""))} (name the column with --text-field, --id-field or --label-field)");
        }
        return -1;
    }

    private static string Describe(CsvMalformedReason reason) => reason switch
    {
        CsvMalformedReason.FieldCountMismatch => "the number of fields differs from the header's",
        CsvMalformedReason.StrayQuote => "a quote inside an unquoted field",
        CsvMalformedReason.TextAfterClosingQuote => "text after the closing quote of a field",
        CsvMalformedReason.UnterminatedQuote => "a quoted field that is never closed",
        CsvMalformedReason.LineBreakInQuotes => "a line break inside quotes",
        _ => $"malformed record ({reason})",
    };

    private static InputRecord Reject(long line, string reason) => new(line, null, "", "", reason);

    /// <summary>Lines of a stream without their LF or CRLF; a line over the cap comes back as (null, true), skipped to its end.</summary>
    private static IEnumerable<(byte[]? Bytes, bool TooLong)> SplitLines(Stream stream)
    {
        byte[] buffer = new byte[1 << 16];
        var line = new MemoryStream();
        bool tooLong = false;
        int read;
        bool any = false;
        while ((read = stream.Read(buffer, 0, buffer.Length)) > 0)
        {
            int start = 0;
            while (start < read)
            {
                int newline = Array.IndexOf(buffer, (byte)'\n', start, read - start);
                int end = newline < 0 ? read : newline;
                if (!tooLong)
                {
                    line.Write(buffer, start, end - start);
                    tooLong = line.Length > MaxRecordBytes + 1;   // + 1: room for a CR before the LF
                }
                any = true;
                if (newline < 0)
                {
                    break;
                }
                yield return Finish(line, tooLong);
                line.SetLength(0);
                tooLong = false;
                any = false;
                start = newline + 1;
            }
        }
        if (any)
        {
            yield return Finish(line, tooLong);
        }
    }

    private static (byte[]? Bytes, bool TooLong) Finish(MemoryStream line, bool tooLong)
    {
        if (tooLong)
        {
            return (null, true);
        }
        byte[] bytes = line.ToArray();
        if (bytes.Length > 0 && bytes[^1] == (byte)'\r')
        {
            bytes = bytes[..^1];
        }
        return bytes.Length > MaxRecordBytes ? (null, true) : (bytes, false);
    }
}
