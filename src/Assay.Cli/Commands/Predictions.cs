using System.Text.Json.Nodes;

namespace Assay.Cli.Commands;

/// <summary>The report.json of a report folder, as the probe, zero-shot and compare commands write it.</summary>
internal static class Predictions
{
    /// <summary>A report's JSON, indented and unescaped.</summary>
    public static void WriteJson(string path, JsonObject json) => File.WriteAllText(path, json.ToJsonString(JsonOutput.Options) + "\n");
}
