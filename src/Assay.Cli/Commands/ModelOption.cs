using System.CommandLine;
using Assay.Model;
using Assay.Weights;

namespace Assay.Cli.Commands;

/// <summary>The <c>--model</c> option every command shares, defaulting to the demo model shipped beside the executable.</summary>
internal static class ModelOption
{
    /// <summary>The bundled demo model: trained by tools/Assay.Trainer, copied next to the executable at build (and into the tool package).</summary>
    public static string DefaultFolder => BundledModel.ExpectedFolder;

    public static Option<DirectoryInfo> Create() => new("--model", "-m")
    {
        Description = "Checkpoint folder: config.json, *.safetensors, tokenizer files (default: the bundled demo model).",
        DefaultValueFactory = _ => new DirectoryInfo(DefaultFolder),
    };

    /// <summary>The <c>--weights</c> option: how the model's matrices are held in memory.</summary>
    public static Option<string> CreateWeights() => new("--weights")
    {
        Description = "Matrices in memory: auto (bfloat16 for a BF16 checkpoint, else float32), float32 (the reference), bfloat16 (half the memory) or int8 (block projections in 8 bits); features drift, see README.",
        DefaultValueFactory = _ => "auto",
    };

    /// <summary>A --weights value: null for auto (the checkpoint decides, see <see cref="LanguageModel.AutomaticPrecision"/>).</summary>
    public static WeightPrecision? ParseWeights(string name) =>
        string.Equals(name, "auto", StringComparison.OrdinalIgnoreCase) ? null : Spellings.Parse<WeightPrecision>("--weights", name);
}
