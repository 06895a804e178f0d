using System.Text.Json;
using System.Text.Unicode;

namespace Assay;

/// <summary>
/// Parses JSON read from outside. Invalid UTF-8 is caught up front: System.Text.Json only notices it when a string is
/// first read, and then throws InvalidOperationException rather than JsonException.
/// </summary>
internal static class JsonInput
{
    /// <summary>Parses <paramref name="utf8"/>, or returns null with the reason in <paramref name="problem"/>.</summary>
    public static JsonDocument? TryParse(byte[] utf8, int maxDepth, out string problem)
    {
        if (!Utf8.IsValid(utf8))
        {
            problem = "not valid UTF-8";
            return null;
        }
        try
        {
            problem = "";
            return JsonDocument.Parse(utf8, new JsonDocumentOptions { MaxDepth = maxDepth });
        }
        catch (JsonException e)
        {
            problem = $"not well-formed JSON ({e.Message})";
            return null;
        }
    }
}
