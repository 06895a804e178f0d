using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Cli;

/// <summary>The files every malformed invocation points at: a model, labelled and unlabelled input, a verbalizer, a finished run.</summary>
public sealed class MalformedOptionFixture : IDisposable
{
    private readonly TempFolder _temp = new();

    public MalformedOptionFixture()
    {
        Model = Checkpoints.Folder(FeatureExtractorTests.Spec);
        Input = ExtractionRunTests.WriteInput(_temp, 12);
        Plain = _temp.File("plain.txt");
        File.WriteAllText(Plain, "one line\nanother line\n");
        Verbalizer = _temp.File("v.txt");
        File.WriteAllText(Verbalizer, "0: zero\n1: one\n2: two\n3: three\n");
        Words = _temp.File("words.txt");
        File.WriteAllText(Words, "cat\ndog\n");
        Run = _temp.File("run");
        Assay.Output.ExtractionRun.Execute(Assay.Model.LanguageModel.Open(Model), Input, Run, new Assay.Output.RunOptions());
        Folder = _temp.Path;
    }

    public string Model { get; }

    public string Input { get; }

    public string Plain { get; }

    public string Verbalizer { get; }

    public string Words { get; }

    public string Run { get; }

    public string Folder { get; }

    public void Dispose() => _temp.Dispose();
}

/// <summary>
/// Every command with malformed values of every option (and bad environment settings), run as a real child process:
/// each ends with exit code 2 and one line on stderr that starts with "assay: " and names the problem, never a .NET
/// stack trace, a type name or the whole help text.
/// </summary>
public sealed class MalformedOptionTests(MalformedOptionFixture f) : IClassFixture<MalformedOptionFixture>
{
    // {M} model, {I} labelled input, {P} plain lines, {V} verbalizer, {W} words, {R} a finished run, {T} a fresh folder.
    public static TheoryData<string, string> Cases => new()
    {
        // Usage: unknown options and commands, missing and unparsable values.
        { "frobnicate", "Unrecognized command or argument 'frobnicate'" },
        { "extract {I} --model {M} --out {T} --bogus", "Unrecognized command or argument '--bogus'" },
        { "extract {I} --model {M}", "Option '--out' is required" },
        { "extract {I} --model {M} --out", "--out" },
        { "extract {I} --model {M} --out ''", "--out \"\": expected a folder path" },
        { "extract {I} --model {M} --out {T} --token-budget abc", "--token-budget abc: expected a whole number" },
        { "extract {I} --model {M} --out {T} --token-budget 0", "--token-budget 0: expected a positive number" },
        // A run whose estimate cannot fit (a billion-token budget: terabytes of activations) is refused before loading.
        { "extract {I} --model {M} --out {T} --token-budget 1000000000", "activations for 1,000,000,000 tokens" },
        { "zero-shot {P} --model {M} --verbalizer {V} --prompt '{text} is' --token-budget 1000000000", "available; choose a smaller --weights storage or --token-budget" },
        { "extract {I} --model {M} --out {T} --commit-rows -3", "--commit-rows -3: expected a positive number" },
        { "extract {I} --model {M} --out {T} --threads -1", "--threads -1: expected 0 (all cores) or a positive count" },
        { "extract {I} --model {M} --out {T} --progress-seconds 0", "--progress-seconds 0: expected a positive number of seconds" },
        { "extract {I} --model {M} --out {T} --progress-seconds x", "--progress-seconds x: expected a number" },
        { "extract {I} --model {M} --out {T} --format yaml", "--format yaml: expected auto, lines, jsonl, csv or tsv" },
        { "extract {I} --model {M} --out {T} --keep middle", "--keep middle: expected head or tail" },
        { "extract {I} --model {M} --out {T} --precision float64", "--precision float64: expected float32 or float16" },
        { "extract {I} --model {M} --out {T} --weights int4", "--weights int4: expected float32, bfloat16 or int8" },
        { "extract {I} --model {M} --out {T} --shard 3/2", "--shard 3/2: expected k/n" },
        { "extract {I} --model {M} --out {T} --shard x", "--shard x" },
        { "extract {I} --model {M} --out {T} --prompt 'no placeholder'", "--prompt: prompt template \"no placeholder\" has no {text}" },
        { "extract {I} --model {M} --out {T} --features hidden:9", "hidden layer 9: this model has layers 0 … 2" },
        { "extract {I} --model {M} --out {T} --features probs", "--features: unknown feature \"probs\"" },
        { "extract {I} --model {M} --out {T} --features words", "needs --words FILE" },
        { "extract {I} --model {M} --out {T} --features cmean --words {W}", "--words is given but no feature reads it" },
        { "extract {I} --model {M} --out {T} --features words --words nope.txt", "nope.txt: no such file" },
        { "extract {I} --model {M} --out {T} --text-field nope", "no record was accepted" },
        { "extract {I} --model {M} --out {T} --resume --overwrite", "resume and overwrite exclude each other" },
        { "extract nope.jsonl --model {M} --out {T}", "no such input file" },
        { "extract {I} --model nope --out {T}", "nope" },
        { "extract {I} --model {M} --out {R}", "holds a finished run" },
        // The other model commands.
        { "next hello --model {M} --top 0", "--top 0: expected a positive number" },
        { "next hello --model {M} --top 100000", "--top 100000: expected 1 … 300 (the vocabulary)" },
        { "next hello --model {M} --top many", "--top many: expected a whole number" },
        { "next '' --model {M}", "the text is empty" },
        { "cross-entropy {I} --model {M} --stride 0", "--stride 0: expected a positive number" },
        { "cross-entropy {I} --model {M} --stride 1000", "--stride 1000: expected 1 … 40 (the context length)" },
        { "cross-entropy {I} --model {M} --stride x", "--stride x: expected a whole number" },
        { "cross-entropy {I} --model {M} --text-field nope", "no text to score" },
        { "cross-entropy {I} --model {M} --format yaml", "--format yaml" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt 'no placeholder'", "--prompt: prompt template \"no placeholder\" has no {text}" },
        { "zero-shot {P} --model {M} --verbalizer {V} --prompt '{text} is'", "no record has a label the verbalizer knows" },
        { "zero-shot {I} --model {M} --verbalizer nope.txt --prompt '{text} is'", "nope.txt: no such verbalizer file" },
        { "zero-shot {I} --model {M} --verbalizer {V}", "Option '--prompt' is required" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt '{text}' --label-field nope", "no record has a label the verbalizer knows" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt '{text}' --threads -1", "--threads -1: expected 0 (all cores) or a positive count" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt '{text}' --keep middle", "--keep middle: expected head or tail" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt '{text}' --token-budget 0", "--token-budget 0: expected a positive number" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt '{text}' --weights int4", "--weights int4: expected float32, bfloat16 or int8" },
        { "zero-shot {I} --model {M} --verbalizer {V} --prompt '{text}' --out {R}", "not part of a report" },
        { "cross-entropy {I} --model {M} --weights int4", "--weights int4: expected float32, bfloat16 or int8" },
        { "cross-entropy {I} --model {M} --threads -2", "--threads -2: expected 0 (all cores) or a positive count" },
        { "next hello --model {M} --threads -1", "--threads -1: expected 0 (all cores) or a positive count" },
        { "next hello --model {M} --weights fp8", "--weights fp8: expected float32, bfloat16 or int8" },
        { "inspect --model nope", "nope" },
        // Evaluation and the run-folder commands.
        { "probe --train {R} --feature cmean --out {T} --folds 0", "--folds 0: cross-validation needs at least 2 folds" },
        { "probe --train {R} --feature cmean --out {T} --folds 1", "--folds 1: cross-validation needs at least 2 folds" },
        { "probe --train {R} --feature cmean --out {T} --folds x", "--folds x: expected a whole number" },
        { "probe --train {R} --feature cmean --out {T} --strengths ''", "--strengths: no values of C to try" },
        { "probe --train {R} --feature cmean --out {T} --strengths 1,-2", "--strengths: \"-2\" is not a positive number" },
        { "probe --train {R} --feature nope --out {T}", "has no feature \"nope\"" },
        { "probe --feature cmean --out {T}", "give --train RUN to fit a probe, or --probe FILE" },
        { "probe --train {T} --feature cmean --out {T}", "no finished run" },
        { "merge --out {T}", "Required argument missing for command: 'merge'" },
        { "merge {R} --out {T}", "holds an unsharded run" },
        { "study nope.json --out {T}", "no such study file" },
        { "manifest verify nope.json", "no such manifest entry" },
        { "manifest", "Required command was not provided" },
    };

    public static TheoryData<string, string> Environments => new()
    {
        { "avx9000", "ASSAY_KERNELS=avx9000 is not a kernel variant" },
        { "vector256:vnni512", "\"vnni512\" is not an int8 path" },
        { "1", "ASSAY_KERNELS=1 is not a kernel variant" },
    };

    [Theory]
    [MemberData(nameof(Cases))]
    public void A_malformed_invocation_ends_with_one_line_and_exit_code_2(string command, string message) =>
        AssertRefused(Arguments(command), message, environment: null);

    [Theory]
    [MemberData(nameof(Environments))]
    public void A_bad_kernel_setting_is_refused_before_any_command_runs(string value, string message)
    {
        AssertRefused(["inspect", "--model", f.Model], message, value);
        AssertRefused(["next", "hello", "--model", f.Model], message, value);
    }

    private void AssertRefused(string[] args, string message, string? environment)
    {
        (int code, string stderr) = Run(args, environment);
        string[] lines = stderr.Split('\n', StringSplitOptions.RemoveEmptyEntries);
        string shown = $"assay {string.Join(' ', args)} (ASSAY_KERNELS={environment}) → exit {code}, stderr:\n{stderr}";
        Assert.True(code == 2, shown);
        Assert.True(lines.Length == 1, shown);
        Assert.StartsWith("assay: ", lines[0], StringComparison.Ordinal);
        Assert.Contains(message, lines[0], StringComparison.Ordinal);
        // No .NET internals: stack frames, exception type names, parameter names, generic arity.
        foreach (string leak in new[] { "   at ", "Exception", "(Parameter '", "`1", "System." })
        {
            Assert.False(stderr.Contains(leak, StringComparison.Ordinal), $"{shown}\nleaks \"{leak}\"");
        }
    }

    private string[] Arguments(string command)
    {
        string fresh = Path.Combine(f.Folder, "out-" + Guid.NewGuid().ToString("N"));
        var args = new List<string>();
        // Words split on spaces; '…' keeps a value with spaces (or an empty one) together.
        foreach (System.Text.RegularExpressions.Match m in System.Text.RegularExpressions.Regex.Matches(command, "'([^']*)'|(\\S+)"))
        {
            string word = m.Groups[1].Success ? m.Groups[1].Value : m.Groups[2].Value;
            args.Add(word.Replace("{M}", f.Model, StringComparison.Ordinal).Replace("{I}", f.Input, StringComparison.Ordinal)
                .Replace("{P}", f.Plain, StringComparison.Ordinal).Replace("{V}", f.Verbalizer, StringComparison.Ordinal)
                .Replace("{W}", f.Words, StringComparison.Ordinal).Replace("{R}", f.Run, StringComparison.Ordinal)
                .Replace("{T}", fresh, StringComparison.Ordinal));
        }
        return [.. args];
    }

    private (int Code, string Stderr) Run(string[] args, string? kernels)
    {
        var psi = new System.Diagnostics.ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true, WorkingDirectory = f.Folder };
        psi.ArgumentList.Add(Path.Combine(AppContext.BaseDirectory, "assay.dll"));
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        psi.Environment.Remove("ASSAY_KERNELS");
        if (kernels != null)
        {
            psi.Environment["ASSAY_KERNELS"] = kernels;
        }
        using var p = System.Diagnostics.Process.Start(psi)!;
        Task<string> stdout = p.StandardOutput.ReadToEndAsync(), stderr = p.StandardError.ReadToEndAsync();
        Assert.True(p.WaitForExit(60_000), $"assay {string.Join(' ', args)} did not finish in 60 s");
        _ = stdout.Result;
        return (p.ExitCode, stderr.Result);
    }
}
