using System.Text;
using System.Text.Encodings.Web;
using System.Text.Json;
using System.Text.Json.Nodes;

namespace Assay.Output;

/// <summary>
/// Whole-file replacement: the new contents go to <c>PATH.tmp</c>, are flushed to the disk, and the temporary file is
/// renamed over PATH, so a reader (or a run resumed after a crash) sees the old file or the new one, never a part.
/// </summary>
internal static class AtomicFile
{
    /// <summary>The suffix of the temporary file (a folder's owner treats such files as its own).</summary>
    public const string TemporarySuffix = ".tmp";

    // Relaxed escaping writes "<f4" and "+" as themselves (control characters and quotes are still escaped).
    private static readonly JsonSerializerOptions Indented = new() { WriteIndented = true, Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping };

    /// <summary>Writes <paramref name="node"/> as indented JSON and a final line break.</summary>
    public static void WriteJson(string path, JsonNode node) => Write(path, file =>
    {
        using (var writer = new Utf8JsonWriter(file, new JsonWriterOptions { Indented = true, Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping }))
        {
            node.WriteTo(writer, Indented);
        }
        file.WriteByte((byte)'\n');
    });

    /// <summary>Writes <paramref name="text"/> as UTF-8 (no byte-order mark).</summary>
    public static void WriteText(string path, string text) => Write(path, file => file.Write(Encoding.UTF8.GetBytes(text)));

    private static void Write(string path, Action<FileStream> write)
    {
        string temporary = path + TemporarySuffix;
        using (var file = new FileStream(temporary, FileMode.Create, FileAccess.Write))
        {
            write(file);
            file.Flush(flushToDisk: true);
        }
        File.Move(temporary, path, overwrite: true);
    }
}
