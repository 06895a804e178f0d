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
        var command = new Command("inspect", "Describe a checkpoint folder and check it against its config.") { folder };
        command.SetAction(r => CommandRunner.Run(() => Run(r.GetValue(folder)!.FullName, Console.Out)));
        return command;
    }

    internal static int Run(string folder, TextWriter o)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        if (!Directory.Exists(folder))
        {
            throw new DirectoryNotFoundException($"{folder}: no such model folder");
        }
        ModelConfig c = ModelConfig.Load(Path.Combine(folder, ModelConfig.FileName));
        o.WriteLine($"model         {folder}");
        o.WriteLine(string.Create(inv, $"architecture  GPT-2 family: {c.Layers} layers, width {c.Width}, {c.Heads} heads of {c.HeadWidth}, MLP {c.InnerWidth}, context {c.ContextLength}, vocabulary {c.VocabularySize}"));
        o.WriteLine(string.Create(inv, $"              activation {Describe(c.Activation)}, norm epsilon {c.NormEpsilon:G6}, output head {(c.TiedHead ? "tied to the token embedding" : "separate (lm_head.weight)")}"));
        o.WriteLine(string.Create(inv, $"parameters    {c.ParameterCount:N0} (tied head counted once)"));

        TextTokenizer tokenizer = TextTokenizer.OpenFolder(folder);
        o.WriteLine(string.Create(inv, $"tokenizer     {tokenizer.Source}; {tokenizer.VocabularySize:N0} ids; end of text = {tokenizer.EndOfTextId}"));

        using SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder);
        List<TensorInfo> tensors = checkpoint.Tensors.OrderBy(t => t.Name, StringComparer.Ordinal).ToList();
        string dtypes = string.Join(", ", tensors.GroupBy(t => t.DType).OrderBy(g => g.Key)
            .Select(g => string.Create(inv, $"{g.Key.Name()} × {g.Count()}")));
        o.WriteLine(string.Create(inv, $"tensors       {tensors.Count} ({dtypes}), {tensors.Sum(t => t.ByteLength):N0} bytes"));

        string? problem = null;
        try
        {
            CheckpointSummary summary = LanguageModel.CheckCheckpoint(checkpoint, c, Path.Combine(folder, ModelConfig.FileName));
            o.WriteLine(string.Create(inv, $"              {summary.ParameterValues:N0} parameter values stored; {summary.SkippedBuffers} mask buffers skipped; names {(summary.NamePrefix.Length == 0 ? "without" : "with")} the \"transformer.\" prefix"));
        }
        catch (WeightsFormatException e)
        {
            problem = e.Message;
        }

        o.WriteLine();
        o.WriteLine("files");
        foreach (ModelFile f in ModelFile.Describe(folder))
        {
            o.WriteLine(string.Create(inv, $"  {f.Name,-36} {f.Bytes,15:N0}  sha256 {f.Sha256}"));
        }

        o.WriteLine();
        o.WriteLine("tensor inventory");
        int nameWidth = Math.Max(4, tensors.Count == 0 ? 0 : tensors.Max(t => t.Name.Length));
        foreach (TensorInfo t in tensors)
        {
            o.WriteLine(string.Create(inv, $"  {t.Name.PadRight(nameWidth)}  {t.DType.Name(),-5} {t.ShapeText,-16} {t.ByteLength,13:N0}  {Path.GetFileName(t.FilePath)}"));
        }

        o.WriteLine();
        if (problem is not null)
        {
            o.WriteLine($"check         FAILED: {problem}");
            return CommandRunner.BadInput;
        }
        o.WriteLine("check         OK: every parameter the config implies is present with its shape");
        return 0;
    }

    private static string Describe(Activation a) => a switch
    {
        Activation.GeluTanh => "GELU (tanh approximation)",
        Activation.GeluErf => "GELU (exact, erf)",
        _ => "ReLU",
    };
}
