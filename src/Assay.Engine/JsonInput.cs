using System.Text.Json;
using System.Text.Unicode;

namespace Assay;

/// <summary>
/// Parses JSON read from outside. Invalid UTF-8 is caught up front: System.Text.Json only notices it when a string is
/// first read, and then throws InvalidOperationException rather than JsonException.
/// </summary>
internal static class JsonInput
{
    /// <summary>
    /// Parses <paramref name="utf8"/>, or returns null with the reason in <paramref name="problem"/>. A key given twice
    /// in an object is refused, unless <paramref name="callerNamesDuplicates"/>: the caller checks the objects where
    /// that can happen and names the key (a tensor, a token).
    /// </summary>
    public static JsonDocument? TryParse(byte[] utf8, int maxDepth, out string problem, bool callerNamesDuplicates = false)
    {
        if (!Utf8.IsValid(utf8))
        {
            problem = "not valid UTF-8";
            return null;
        }
        JsonDocument document;
        try
        {
            // A key given twice is refused: which of the two values counts would be a guess.
            document = JsonDocument.Parse(utf8, new JsonDocumentOptions { MaxDepth = maxDepth, AllowDuplicateProperties = callerNamesDuplicates });
        }
        catch (JsonException e)
        {
            problem = $"not well-formed JSON ({e.Message})";
            return null;
        }
        catch (InvalidOperationException)
        {
            // The duplicate-key check unescapes every key: one with a lone surrogate cannot be.
            problem = "a key holds a lone surrogate escape (a \\uD800–\\uDFFF escape without its pair), which is not text";
            return null;
        }
        // Only a \u escape can make a lone surrogate (valid UTF-8 cannot): most documents skip the walk.
        if (utf8.AsSpan().IndexOf("\\u"u8) >= 0 && LoneSurrogate(document.RootElement, "") is string where)
        {
            document.Dispose();
            problem = $"{where} holds a lone surrogate escape (a \\uD800–\\uDFFF escape without its pair), which is not text";
            return null;
        }
        problem = "";
        return document;
    }

    /// <summary>As <see cref="TryParse"/>, as a mutable node.</summary>
    public static System.Text.Json.Nodes.JsonNode? TryParseNode(byte[] utf8, int maxDepth, out string problem)
    {
        using JsonDocument? document = TryParse(utf8, maxDepth, out problem);
        return document == null ? null : System.Text.Json.Nodes.JsonNode.Parse(utf8, documentOptions: new JsonDocumentOptions { MaxDepth = maxDepth });
    }

    /// <summary>
    /// Where a string or key holds an escaped surrogate without its pair (valid JSON, but no text: reading it throws
    /// InvalidOperationException); null when there is none.
    /// </summary>
    private static string? LoneSurrogate(JsonElement e, string path)
    {
        switch (e.ValueKind)
        {
            case JsonValueKind.String:
                try
                {
                    _ = e.GetString();
                    return null;
                }
                catch (InvalidOperationException)
                {
                    return path.Length == 0 ? "the value" : path;
                }
            case JsonValueKind.Object:
                foreach (JsonProperty p in e.EnumerateObject())
                {
                    string name;
                    try
                    {
                        name = p.Name;
                    }
                    catch (InvalidOperationException)
                    {
                        return (path.Length == 0 ? "" : path + ": ") + "a key";
                    }
                    if (LoneSurrogate(p.Value, path.Length == 0 ? $"field \"{Cut(name)}\"" : $"{path}.{Cut(name)}") is string inner)
                    {
                        return inner;
                    }
                }
                return null;
            case JsonValueKind.Array:
                int i = 0;
                foreach (JsonElement item in e.EnumerateArray())
                {
                    if (LoneSurrogate(item, $"{(path.Length == 0 ? "element " : path)}[{i}]") is string inner)
                    {
                        return inner;
                    }
                    i++;
                }
                return null;
            default:
                return null;
        }
    }

    private static string Cut(string name) => name.Length <= 40 ? name : name[..40] + "…";
}
