using System.CommandLine;

namespace Assay.Cli.Commands;

/// <summary>The <c>--model</c> option every command shares, defaulting to the demo model shipped beside the executable.</summary>
internal static class ModelOption
{
    /// <summary>The bundled demo model: trained by tools/Assay.Trainer, copied next to the executable at build.</summary>
    public static string DefaultFolder => Path.Combine(AppContext.BaseDirectory, "models", "assay-demo");

    public static Option<DirectoryInfo> Create() => new("--model", "-m")
    {
        Description = "Checkpoint folder: config.json, *.safetensors, tokenizer files (default: the bundled demo model).",
        DefaultValueFactory = _ => new DirectoryInfo(DefaultFolder),
    };
}
