using System.Text.Encodings.Web;
using System.Text.Json;

namespace Assay.Cli.Commands;

/// <summary>How the commands' --json output is written: indented, unescaped (&lt;f4, +, non-ASCII text as itself).</summary>
internal static class JsonOutput
{
    public static readonly JsonSerializerOptions Options = new() { WriteIndented = true, Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping };
}
