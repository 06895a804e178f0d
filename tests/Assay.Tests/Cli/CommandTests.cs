using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Fixtures;
using Assay.Tests.Support;

namespace Assay.Tests.Cli;

public sealed class CommandTests
{
    private static readonly CheckpointSpec Spec = new() { Width = 32, Heads = 4, Layers = 2, Context = 16 };

    [Fact]
    public void Inspect_reports_parameters_tensors_and_sha256_of_every_file()
    {
        string folder = Checkpoints.Folder(Spec);
        var o = new StringWriter();
        Assert.Equal(0, InspectCommand.Run(folder, o));
        string text = o.ToString();
        Assert.Contains(Assay.Config.ModelConfig.Load(Path.Combine(folder, "config.json")).ParameterCount.ToString("N0", CultureInfo.InvariantCulture), text, StringComparison.Ordinal);
        Assert.Contains("h.1.mlp.c_proj.weight", text, StringComparison.Ordinal);
        Assert.Contains("4 buffers skipped", text, StringComparison.Ordinal);
        Assert.Contains("check         OK", text, StringComparison.Ordinal);
        // Outside reference for the hashes: coreutils sha256sum.
        foreach (string file in Directory.GetFiles(folder))
        {
            string line = RunTool("sha256sum", file);
            Assert.Contains(line[..64], text, StringComparison.Ordinal);
        }
    }

    [Fact]
    public void Inspect_shows_the_inventory_and_fails_on_a_mismatched_config()
    {
        using var temp = new TempFolder();
        string folder = SyntheticCheckpoint.Write(Spec, temp.File("m"));
        SyntheticCheckpoint.WriteConfig(Spec with { Layers = 3 }, Path.Combine(folder, "config.json"));
        var o = new StringWriter();
        Assert.Equal(2, InspectCommand.Run(folder, o));
        Assert.Contains("h.0.ln_1.weight", o.ToString(), StringComparison.Ordinal);
        Assert.Contains("check         FAILED", o.ToString(), StringComparison.Ordinal);
        Assert.Contains("h.2.", o.ToString(), StringComparison.Ordinal);
    }

    [Fact]
    public void Next_lists_the_most_likely_tokens_with_the_reference_probabilities()
    {
        string folder = Checkpoints.Folder(Spec);
        const string text = "the lamp";
        var o = new StringWriter();
        Assert.Equal(0, NextCommand.Run(folder, text, 5, o));
        string[] rows = o.ToString().Split('\n', StringSplitOptions.RemoveEmptyEntries)[2..];
        Assert.Equal(5, rows.Length);

        // Outside reference: the numpy forward pass on the same token ids, softmax in float64.
        int[] ids = Assay.Model.LanguageModel.Open(folder).Tokenizer.Encode(text);
        using var temp = new TempFolder();
        File.WriteAllText(temp.File("s.json"), JsonSerializer.Serialize(new[] { ids }));
        PythonReference.Run("gpt2_numpy.py", folder, temp.File("s.json"), temp.File("out"));
        (double[] logits, _) = Npy.Read(Path.Combine(temp.File("out"), "logits_last.npy"));
        double max = logits.Max();
        double z = logits.Sum(l => Math.Exp(l - max));
        int[] order = [.. Enumerable.Range(0, logits.Length).OrderByDescending(i => logits[i])];
        for (int r = 0; r < 5; r++)
        {
            string[] cells = rows[r].Split(' ', StringSplitOptions.RemoveEmptyEntries);
            Assert.Equal(order[r], int.Parse(cells[2], CultureInfo.InvariantCulture));
            double p = Math.Exp(logits[order[r]] - max) / z;
            Assert.Equal(p, double.Parse(cells[1], CultureInfo.InvariantCulture), 5);
        }
    }

    [Fact]
    public void Commands_turn_bad_input_into_exit_code_2()
    {
        using var temp = new TempFolder();
        Assert.Equal(2, CommandRunner.Run(() => NextCommand.Run(temp.Path, "x", 3, TextWriter.Null)));
        Assert.Equal(2, CommandRunner.Run(() => NextCommand.Run(Checkpoints.Folder(Spec), "x", 0, TextWriter.Null)));
    }

    private static string RunTool(string tool, string arg)
    {
        var psi = new ProcessStartInfo(tool, [arg]) { RedirectStandardOutput = true };
        using Process p = Process.Start(psi)!;
        string s = p.StandardOutput.ReadToEnd();
        p.WaitForExit();
        Assert.Equal(0, p.ExitCode);
        return s;
    }

}
