using System.CommandLine;
using System.Globalization;
using Assay.Evaluation;
using Assay.Input;
using Assay.Model;

namespace Assay.Cli.Commands;

/// <summary><c>assay cross-entropy &lt;input&gt; [--model &lt;dir&gt;] [--stride N]</c>: the model's cross-entropy on a corpus.</summary>
internal static class CrossEntropyCommand
{
    public static Command Create()
    {
        var input = new Argument<FileInfo>("input") { Description = "Texts: plain lines, JSONL, CSV or TSV (as for extract)." };
        var model = ModelOption.Create();
        var stride = new Option<int?>("--stride") { Description = "Window stride for texts longer than the context (default: the context length)." };
        var shared = new SharedOptions();
        var json = new Option<bool>("--json") { Description = "Write one JSON object instead of the text." };
        var command = new Command("cross-entropy", "The model's next-token cross-entropy on a corpus: nats per token, bits per byte and perplexity.")
        {
            input, model, stride, json,
        };
        shared.AddInput(command, fields: false);
        shared.AddModel(command, prompted: false);
        command.SetAction(r => CommandRunner.Run(() => Run(r.GetValue(model)!.FullName, SharedOptions.InputPath(r.GetValue(input)!), r.GetValue(stride),
            ExtractCommand.Format(r.GetValue(shared.Format)!), r.GetValue(shared.TextField)!, Console.Out, r.GetValue(json), shared.Model(r), Console.Error)));
        return command;
    }

    internal static int Run(string folder, string input, int? stride, InputFormat format, string textField, TextWriter o, bool json = false, ModelRun? run = null, TextWriter? err = null)
    {
        if (stride is int s0)
        {
            ExtractCommand.Positive("--stride", s0);
        }
        run ??= new ModelRun();
        LanguageModel m = run.Open(folder, err ?? TextWriter.Null);
        int threads = run.Threads;
        if (stride > m.Config.ContextLength)
        {
            throw new ArgumentException($"--stride {stride}: expected 1 … {m.Config.ContextLength} (the context length)");
        }
        using TextInputReader reader = TextInputReader.Open(input, format, new InputFields { Text = textField });
        long rejected = 0;
        IEnumerable<string> Texts()
        {
            foreach (InputRecord r in reader.Records())
            {
                if (r.Accepted)
                {
                    yield return r.Text!;
                }
                else
                {
                    rejected++;
                }
            }
        }
        var printer = TextProgressPrinter.ForConsole(err ?? TextWriter.Null, total: null,
            () => reader.Fraction);
        CrossEntropyResult s = CrossEntropy.Score(m, Texts(), stride, threads, printer, run.BeginningOfSequence);
        printer.End();
        CultureInfo inv = CultureInfo.InvariantCulture;
        int[] bos = m.Tokenizer.SequenceStart(run.BeginningOfSequence);
        string start = bos.Length == 1 ? "beginning-of-sequence" : "end-of-text";
        if (s.Tokens == 0)
        {
            // No predicted token means no cross-entropy (0 / 0), never a "NaN nats/token" result.
            throw new ArgumentException(string.Create(inv, $"{input}: no text to score ({rejected:N0} records rejected, e.g. without a \"{textField}\" field)"));
        }
        if (json)
        {
            o.WriteLine(new System.Text.Json.Nodes.JsonObject
            {
                ["texts"] = s.Texts, ["rejected"] = rejected, ["tokens"] = s.Tokens, ["tokens_run"] = s.TokensRun, ["bytes"] = s.Bytes, ["nats"] = s.Nats,
                ["nats_per_token"] = s.NatsPerToken, ["bits_per_byte"] = s.BitsPerByte, ["perplexity"] = s.Perplexity,
                ["stride"] = stride ?? m.Config.ContextLength,
                ["start_token"] = m.Tokenizer.TokenText(bos.Length == 1 ? bos[0] : m.Tokenizer.EndOfTextId),
            }.ToJsonString(JsonOutput.Options));
            return 0;
        }
        o.WriteLine(string.Create(inv, $"texts          {s.Texts:N0} scored ({rejected:N0} rejected records skipped)"));
        o.WriteLine(string.Create(inv, $"tokens         {s.Tokens:N0} predicted ({s.TokensRun:N0} run through the model, with each text's {start} context token{(s.TokensRun > s.Tokens + s.Texts ? " and the windows' overlap" : "")}), {s.Bytes:N0} UTF-8 bytes"));
        o.WriteLine(string.Create(inv, $"cross-entropy  {s.NatsPerToken:F4} nats/token, {s.BitsPerByte:F4} bits/byte, perplexity {s.Perplexity:F2}"));
        return 0;
    }
}
