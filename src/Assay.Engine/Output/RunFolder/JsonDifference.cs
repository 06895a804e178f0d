using System.Text.Json.Nodes;

namespace Assay.Output;

/// <summary>Where two JSON trees first differ, as a path and both values ("model.files[2].sha256: "ab…" vs "cd…"").</summary>
internal static class JsonDifference
{
    private const int ShownCharacters = 72;

    /// <summary>The first difference in document order (keys of <paramref name="a"/> first), or null when the trees are equal.</summary>
    public static string? First(JsonNode? a, JsonNode? b, string path = "")
    {
        switch (a, b)
        {
            case (JsonObject x, JsonObject y):
                foreach ((string key, JsonNode? value) in x)
                {
                    if (First(value, y[key], Join(path, key)) is string d)
                    {
                        return y.ContainsKey(key) ? d : $"{Join(path, key)}: {Shown(value)} vs none";
                    }
                }
                foreach ((string key, JsonNode? value) in y)
                {
                    if (!x.ContainsKey(key))
                    {
                        return $"{Join(path, key)}: none vs {Shown(value)}";
                    }
                }
                return null;
            case (JsonArray x, JsonArray y):
                for (int i = 0; i < Math.Min(x.Count, y.Count); i++)
                {
                    if (First(x[i], y[i], $"{path}[{i}]") is string d)
                    {
                        return d;
                    }
                }
                return x.Count == y.Count ? null : $"{path}: {x.Count} items vs {y.Count}";
            default:
                return JsonNode.DeepEquals(a, b) ? null : $"{(path.Length == 0 ? "value" : path)}: {Shown(a)} vs {Shown(b)}";
        }
    }

    private static string Join(string path, string key) => path.Length == 0 ? key : path + "." + key;

    private static string Shown(JsonNode? node)
    {
        string text = node?.ToJsonString() ?? "null";
        return text.Length <= ShownCharacters ? text : string.Concat(text.AsSpan(0, ShownCharacters), $"… ({text.Length} characters)");
    }
}
