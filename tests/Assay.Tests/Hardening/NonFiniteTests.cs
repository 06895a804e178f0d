using Assay.Fixtures;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Cli;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Hardening;

/// <summary>A forward pass that overflows stops with the stage, the record and a clear message; no feature holds a NaN.</summary>
public sealed class NonFiniteTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    /// <summary>The test checkpoint with block 1's MLP output weights at 3e38: finite, but every product with them overflows.</summary>
    private string HugeWeights()
    {
        CheckpointSpec spec = FeatureExtractorTests.Spec;
        return SyntheticCheckpoint.Write(spec, SyntheticCheckpoint.Parameters(spec).Select(p =>
            p.Name == "h.1.mlp.c_proj.weight" ? p with { Values = [.. p.Values.Select(_ => 3e38f)] } : p), _temp.File("huge"));
    }

    [Theory]
    [InlineData(float.NaN)]
    [InlineData(float.PositiveInfinity)]
    [InlineData(float.NegativeInfinity)]
    public void The_vectorized_scan_finds_a_value_at_every_position(float bad)
    {
        // Against a plain scalar scan (the reference), for lengths that exercise the vector body and every tail.
        for (int n = 1; n <= 70; n++)
        {
            for (int at = 0; at < n; at++)
            {
                float[] x = [.. Enumerable.Range(0, n).Select(i => (float)Math.Sin(i) * 1e30f)];
                x[at] = bad;
                Assert.Equal((at / 5, bad), NonFiniteValueException.Find(x, 5));
            }
            Assert.Null(NonFiniteValueException.Find([.. Enumerable.Range(0, n).Select(i => (i % 11) * 3e37f)], 5));
        }
    }

    [Fact]
    public void An_extraction_stops_at_the_first_overflow_naming_the_layer_and_the_record()
    {
        LanguageModel m = LanguageModel.Open(HugeWeights());
        string input = ExtractionRunTests.WriteInput(_temp, 5);
        var e = Assert.Throws<NonFiniteValueException>(() => ExtractionRun.Execute(m, input, _temp.File("run"), new RunOptions()));
        Assert.Equal("layer 2", e.Stage);
        // The batch runs shortest first: the record named is one of the batch's, with its line and id.
        Assert.Matches($"{System.Text.RegularExpressions.Regex.Escape(input)} line [0-9]+ \\(id \"t[0-9]+\"\\)", e.Message);
        Assert.Contains("in layer 2 at token", e.Message, StringComparison.Ordinal);
        Assert.False(File.Exists(Path.Combine(_temp.File("run"), RunFolder.RecordFile)));
    }

    [Theory]
    [InlineData("next", "a lamp")]
    [InlineData("cross-entropy", "{input}")]
    [InlineData("zero-shot", "{input}")]
    public async Task Every_command_that_runs_the_model_exits_2_with_one_line(string command, string argument)
    {
        string model = HugeWeights();
        string input = ExtractionRunTests.WriteInput(_temp, 5);
        File.WriteAllLines(_temp.File("v.txt"), ["0: lamp", "1: salt", "2: bell", "3: oar"]);
        string[] args = command == "zero-shot"
            ? [command, input, "--model", model, "--verbalizer", _temp.File("v.txt"), "--prompt", "{text} It is a"]
            : [command, argument.Replace("{input}", input, StringComparison.Ordinal), "--model", model];
        using System.Diagnostics.Process p = ExtractCommandTests.StartChild(args);
        Task<string> stdout = p.StandardOutput.ReadToEndAsync();
        string err = await p.StandardError.ReadToEndAsync();
        await p.WaitForExitAsync();
        Assert.Equal(2, p.ExitCode);
        string[] lines = err.TrimEnd().Split('\n');
        Assert.Contains(lines, l => l.StartsWith("assay: ", StringComparison.Ordinal) && l.Contains("the forward pass gave", StringComparison.Ordinal));
        Assert.DoesNotContain(lines, l => l.TrimStart().StartsWith("at ", StringComparison.Ordinal));
        Assert.DoesNotContain("NaN", await stdout, StringComparison.Ordinal);
    }

    [Fact]
    public void Inspect_refuses_a_nan_weight_and_tokenizer_ids_past_the_vocabulary()
    {
        // An F16 checkpoint with one NaN in block 0's attention weights: found, with the tensor and the element.
        CheckpointSpec spec = FeatureExtractorTests.Spec with { DType = "F16" };
        string nan = SyntheticCheckpoint.Write(spec, SyntheticCheckpoint.Parameters(spec).Select(p =>
            p.Name == "h.0.attn.c_attn.weight" ? p with { Values = [.. p.Values.Select((v, i) => i == 1234 ? float.NaN : v)] } : p), _temp.File("nan"));
        var o = new StringWriter();
        Assert.Equal(2, Assay.Cli.Commands.InspectCommand.Run(nan, o));
        Assert.Contains("check         FAILED: ", o.ToString(), StringComparison.Ordinal);
        Assert.Contains("tensor h.0.attn.c_attn.weight holds NaN at element 1,234 of ", o.ToString(), StringComparison.Ordinal);
        Assert.Equal(2, Assay.Cli.Commands.InspectCommand.RunJson(nan, new StringWriter()));

        // The same model, finite: OK. Then a vocabulary id far past vocab_size, which LanguageModel.Open refuses too.
        string good = Checkpoints.Folder(FeatureExtractorTests.Spec);
        Assert.Equal(0, Assay.Cli.Commands.InspectCommand.Run(good, new StringWriter()));
        string ids = _temp.File("ids");
        Directory.CreateDirectory(ids);
        foreach (string f in Directory.GetFiles(good))
        {
            File.Copy(f, Path.Combine(ids, Path.GetFileName(f)));
        }
        string vocab = Path.Combine(ids, "vocab.json");
        File.WriteAllText(vocab, File.ReadAllText(vocab).TrimEnd().TrimEnd('}') + ", \"zzzz\": 99999999}");
        o = new StringWriter();
        Assert.Equal(2, Assay.Cli.Commands.InspectCommand.Run(ids, o));
        Assert.Contains("the tokenizer has ids up to 99999999", o.ToString(), StringComparison.Ordinal);
        Assert.Throws<Assay.Tokenization.TokenizerFileException>(() => LanguageModel.Open(ids));
    }
}
