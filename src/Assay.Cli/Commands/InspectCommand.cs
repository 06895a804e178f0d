using System.CommandLine;
using System.Globalization;
using Assay.Config;
using Assay.Model;
using Assay.Tokenization;
using Assay.Weights;

namespace Assay.Cli.Commands;

/// <summary><c>assay inspect [--model &lt;dir&gt;]</c>: architecture, parameter count, dtypes, tensor inventory, files and hashes.</summary>
internal static class InspectCommand
{
    public static Command Create()
    {
        var folder = ModelOption.Create();
        var json = new Option<bool>("--json") { Description = "Write one JSON object instead of the text." };
        var command = new Command("inspect", "Describe a checkpoint folder and check it against its config.") { folder, json };
        command.SetAction(r => CommandRunner.Run(() => r.GetValue(json) ? RunJson(r.GetValue(folder)!.FullName, Console.Out) : Run(r.GetValue(folder)!.FullName, Console.Out)));
        return command;
    }

    /// <summary>The feature lists whose files inspect lists, one per kind and pooling.</summary>
    private static readonly string[] Examples = ["hidden:0", "hidden", "hidden:mean", "hidden:mark", "nextword", "topk:10", "words", "words-loglik", "cmean", "completions"];

    private static readonly WeightPrecision[] Storages = [WeightPrecision.Binary32, WeightPrecision.BFloat16, WeightPrecision.Integer8];

    /// <summary>The widest the tensor-name column gets.</summary>
    private const int NameColumn = 80;

    internal static int Run(string folder, TextWriter o)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        if (!Directory.Exists(folder))
        {
            throw new DirectoryNotFoundException($"{folder}: no such model folder");
        }
        ModelConfig c = ModelConfig.Load(Path.Combine(folder, ModelConfig.FileName));
        o.WriteLine($"model         {folder}");
        o.WriteLine(string.Create(inv, $"architecture  {c.FamilyName} (model_type {c.ModelType}): {c.Layers} layers, width {c.Width}, {c.Heads} heads of {c.HeadWidth}{(c.KeyValueHeads == c.Heads ? "" : string.Create(inv, $" on {c.KeyValueHeads} key/value heads"))}, MLP {c.InnerWidth}, context {c.ContextLength}, vocabulary {c.VocabularySize}"));
        o.WriteLine($"recipe        {c.Recipe}");
        o.WriteLine(string.Create(inv, $"parameters    {c.ParameterCount:N0} (tied head counted once)"));
        o.WriteLine(string.Create(inv, $"layers        0 … {c.Layers} for hidden:LAYER (0 = embeddings, k = after block k, {c.Layers} = after the final norm; −1 … −{c.Layers + 1} count from the end)"));
        o.WriteLine("weights       " + string.Join(", ", Storages.Select(p => string.Create(inv, $"{Assay.Spellings.Of(p)} {LanguageModel.WeightBytesFor(c, p) / 1048576.0:N1} MiB"))) + " in memory (--weights)");
        o.WriteLine("outputs       " + string.Join("; ", Examples.Select(e => $"{e} → {string.Join(" + ", Assay.Features.FeatureSpec.OutputFiles(e, c))}")));

        TextTokenizer tokenizer = TextTokenizer.OpenFolder(folder);
        o.WriteLine(string.Create(inv, $"tokenizer     {tokenizer.Source}; {tokenizer.VocabularySize:N0} ids; end of text = {tokenizer.EndOfTextId}"));

        using SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder);
        List<TensorInfo> tensors = checkpoint.Tensors.OrderBy(t => t.Name, StringComparer.Ordinal).ToList();
        string dtypes = string.Join(", ", tensors.GroupBy(t => t.DType).OrderBy(g => g.Key)
            .Select(g => string.Create(inv, $"{g.Key.Name()} × {g.Count()}")));
        o.WriteLine(string.Create(inv, $"tensors       {tensors.Count} ({dtypes}), {tensors.Sum(t => t.ByteLength):N0} bytes"));

        string? problem = Check(folder, c, tokenizer, checkpoint, out CheckpointSummary? summary);
        if (summary is not null)
        {
            o.WriteLine(string.Create(inv, $"              {summary.ParameterValues:N0} parameter values stored; {summary.SkippedBuffers} buffers skipped (causal masks, rotary tables)")
                + (c.Family == ModelFamily.Gpt2 ? $"; names {(summary.NamePrefix.Length == 0 ? "without" : "with")} the \"transformer.\" prefix" : ""));
        }

        o.WriteLine();
        o.WriteLine("files");
        foreach (ModelFile f in ModelFile.Describe(folder))
        {
            o.WriteLine(string.Create(inv, $"  {f.Name,-36} {f.Bytes,15:N0}  sha256 {f.Sha256}"));
        }

        o.WriteLine();
        o.WriteLine("tensor inventory");
        // The name column is as wide as the longest name up to 80 characters; a longer name is cut (Echo) and its row
        // runs past the column, so no name makes every row long.
        int nameWidth = Math.Clamp(tensors.Count == 0 ? 0 : tensors.Max(t => t.Name.Length), 4, NameColumn);
        foreach (TensorInfo t in tensors)
        {
            o.WriteLine(string.Create(inv, $"  {Echo.Of(t.Name, NameColumn).PadRight(nameWidth)}  {t.DType.Name(),-5} {t.ShapeText,-16} {t.ByteLength,13:N0}  {Path.GetFileName(t.FilePath)}"));
        }

        o.WriteLine();
        if (problem is not null)
        {
            o.WriteLine($"check         FAILED: {problem}");
            return CommandRunner.BadInput;
        }
        o.WriteLine("check         OK: every parameter the config implies is present with its shape, every stored value is finite, and every tokenizer id is in the vocabulary");
        return 0;
    }

    /// <summary>Everything <see cref="Run"/> prints, as one JSON object (exit code 2 when the check fails, as there).</summary>
    internal static int RunJson(string folder, TextWriter o)
    {
        if (!Directory.Exists(folder))
        {
            throw new DirectoryNotFoundException($"{folder}: no such model folder");
        }
        string configPath = Path.Combine(folder, ModelConfig.FileName);
        ModelConfig c = ModelConfig.Load(configPath);
        TextTokenizer tokenizer = TextTokenizer.OpenFolder(folder);
        using SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder);
        string? problem = Check(folder, c, tokenizer, checkpoint, out CheckpointSummary? summary);
        var outputs = new System.Text.Json.Nodes.JsonObject();
        foreach (string e in Examples)
        {
            outputs[e] = new System.Text.Json.Nodes.JsonArray([.. Assay.Features.FeatureSpec.OutputFiles(e, c).Select(f => System.Text.Json.Nodes.JsonValue.Create(f))]);
        }
        var weights = new System.Text.Json.Nodes.JsonObject();
        foreach (WeightPrecision p in Storages)
        {
            weights[Assay.Spellings.Of(p)] = LanguageModel.WeightBytesFor(c, p);
        }
        var report = new System.Text.Json.Nodes.JsonObject
        {
            ["model"] = folder,
            ["family"] = c.ModelType,
            ["architecture"] = new System.Text.Json.Nodes.JsonObject
            {
                ["layers"] = c.Layers, ["width"] = c.Width, ["heads"] = c.Heads, ["kv_heads"] = c.KeyValueHeads, ["head_width"] = c.HeadWidth,
                ["inner_width"] = c.InnerWidth, ["context"] = c.ContextLength, ["vocabulary"] = c.VocabularySize,
                ["norm"] = c.Norm == NormKind.RmsNorm ? "rmsnorm" : "layernorm", ["norm_epsilon"] = c.NormEpsilon,
                ["positions"] = c.Rotary is null ? "learned" : "rotary", ["rotary_dims"] = c.Rotary?.Dimensions, ["rotary_base"] = c.Rotary?.Base,
                ["rotary_scaling"] = c.Rotary is null ? null : c.Rotary.Scaling.ToString().ToLowerInvariant(),
                ["sliding_window"] = c.SlidingWindow == 0 ? null : c.SlidingWindow,
                ["mlp"] = c.GatedMlp ? "gated" : "plain", ["activation"] = Describe(c.Activation),
                ["parallel_residual"] = c.ParallelResidual, ["tied_head"] = c.TiedHead,
                ["recipe"] = c.Recipe,
            },
            ["parameters"] = c.ParameterCount,
            ["hidden_layers"] = new System.Text.Json.Nodes.JsonArray([.. Enumerable.Range(0, c.Layers + 1).Select(l => System.Text.Json.Nodes.JsonValue.Create(l))]),
            ["weight_bytes"] = weights,
            ["outputs"] = outputs,
            ["tokenizer"] = new System.Text.Json.Nodes.JsonObject { ["source"] = tokenizer.Source, ["vocabulary"] = tokenizer.VocabularySize, ["end_of_text"] = tokenizer.EndOfTextId },
            ["tensors"] = new System.Text.Json.Nodes.JsonArray([.. checkpoint.Tensors.OrderBy(t => t.Name, StringComparer.Ordinal).Select(t => new System.Text.Json.Nodes.JsonObject
            {
                ["name"] = t.Name, ["dtype"] = t.DType.Name(), ["shape"] = new System.Text.Json.Nodes.JsonArray([.. t.Shape.Select(x => System.Text.Json.Nodes.JsonValue.Create(x))]),
                ["bytes"] = t.ByteLength, ["file"] = Path.GetFileName(t.FilePath),
            })]),
            ["files"] = new System.Text.Json.Nodes.JsonArray([.. ModelFile.Describe(folder).Select(f => new System.Text.Json.Nodes.JsonObject { ["name"] = f.Name, ["bytes"] = f.Bytes, ["sha256"] = f.Sha256 })]),
            ["check"] = new System.Text.Json.Nodes.JsonObject
            {
                ["ok"] = problem == null,
                ["problem"] = problem,
                ["parameter_values"] = summary?.ParameterValues,
                ["skipped_buffers"] = summary?.SkippedBuffers,
            },
        };
        o.WriteLine(report.ToJsonString(JsonOutput.Options));
        return problem == null ? 0 : CommandRunner.BadInput;
    }

    /// <summary>
    /// What every other command would refuse, found without loading: the tensors against the config, the tokenizer's
    /// ids against the vocabulary, and every stored value (NaN or infinite ones). The first problem, or null.
    /// </summary>
    private static string? Check(string folder, ModelConfig c, TextTokenizer tokenizer, SafetensorsCheckpoint checkpoint, out CheckpointSummary? summary)
    {
        string configPath = Path.Combine(folder, ModelConfig.FileName);
        summary = null;
        try
        {
            summary = LanguageModel.CheckCheckpoint(checkpoint, c, configPath);
            LanguageModel.CheckTokenizer(tokenizer, c, configPath);
        }
        catch (InvalidInputException e)
        {
            return e.Message;
        }
        if (checkpoint.FirstNonFiniteValue() is { } bad)
        {
            return string.Create(CultureInfo.InvariantCulture,
                $"{bad.Tensor.FilePath}: tensor {Echo.Of(bad.Tensor.Name)} holds {(float.IsNaN(bad.Value) ? "NaN" : bad.Value > 0 ? "+infinity" : "-infinity")} at element {bad.Index:N0} of {bad.Tensor.ElementCount:N0}; every forward pass would stop on it");
        }
        return null;
    }

    private static string Describe(Activation a) => a switch
    {
        Activation.GeluTanh => "GELU (tanh approximation)",
        Activation.GeluErf => "GELU (exact, erf)",
        Activation.Silu => "SiLU",
        _ => "ReLU",
    };

}
