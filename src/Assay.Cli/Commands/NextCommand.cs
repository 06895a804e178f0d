using System.CommandLine;
using System.Globalization;
using System.Text;
using Assay.Model;

namespace Assay.Cli.Commands;

/// <summary><c>assay next "&lt;text&gt;" [--model &lt;dir&gt;] --top N</c>: the most likely next tokens after a text.</summary>
internal static class NextCommand
{
    public static Command Create()
    {
        var folder = ModelOption.Create();
        var text = new Argument<string>("text") { Description = "The text to continue." };
        var top = new Option<int>("--top")
        {
            Description = "How many tokens to list.",
            DefaultValueFactory = _ => 10,
        };
        var json = new Option<bool>("--json") { Description = "Write one JSON object instead of the table." };
        var command = new Command("next", "List the most likely next tokens after a text, with their probabilities.") { text, folder, top, json };
        var shared = new SharedOptions();
        shared.AddModel(command, prompted: false);
        command.SetAction(r => CommandRunner.Run(() =>
            Run(r.GetValue(folder)!.FullName, r.GetValue(text)!, r.GetValue(top), Console.Out, r.GetValue(json), shared.Model(r), Console.Error)));
        return command;
    }

    internal static int Run(string folder, string text, int top, TextWriter o, bool json = false, ModelRun? run = null, TextWriter? err = null)
    {
        if (top < 1)
        {
            throw new ArgumentException($"--top {top}: expected a positive number");
        }
        run ??= new ModelRun();
        LanguageModel model = run.Open(folder, err ?? TextWriter.Null);
        int threads = run.Threads;
        if (top > model.Config.VocabularySize)
        {
            throw new ArgumentException($"--top {top}: expected 1 … {model.Config.VocabularySize} (the vocabulary)");
        }
        int[] ids = model.Tokenizer.Encode(text);
        if (ids.Length == 0)
        {
            throw new ArgumentException("the text is empty; give at least one character");
        }
        int[] start = model.Tokenizer.SequenceStart(run.BeginningOfSequence);
        if (start.Length + ids.Length > model.Config.ContextLength)
        {
            // The most recent context decides the next word: keep the tail.
            ids = ids[^(model.Config.ContextLength - start.Length)..];
        }
        ids = [.. start, .. ids];
        ForwardResult r = model.Forward([ids], ForwardOptions.LastLogits with { MaxThreads = threads });
        float[] p = new float[r.VocabularySize];
        r.NextTokenProbabilities(0, p);

        int n = Math.Min(top, p.Length);
        int[] order = Enumerable.Range(0, p.Length).ToArray();
        Array.Sort(order, (a, b) => p[b] != p[a] ? p[b].CompareTo(p[a]) : a.CompareTo(b));

        CultureInfo inv = CultureInfo.InvariantCulture;
        if (json)
        {
            o.WriteLine(new System.Text.Json.Nodes.JsonObject
            {
                ["tokens"] = ids.Length,
                ["vocabulary"] = p.Length,
                ["next"] = new System.Text.Json.Nodes.JsonArray([.. order.Take(n).Select((id, i) => new System.Text.Json.Nodes.JsonObject
                {
                    ["rank"] = i + 1, ["id"] = id, ["token"] = model.Tokenizer.Decode([id]), ["probability"] = p[id],
                })]),
            }.ToJsonString(JsonOutput.Options));
            return 0;
        }
        o.WriteLine(string.Create(inv, $"{ids.Length} tokens in; next-token distribution over {p.Length:N0} ids"));
        o.WriteLine("rank  probability      id  token");
        for (int i = 0; i < n; i++)
        {
            int id = order[i];
            o.WriteLine(string.Create(inv, $"{i + 1,4}  {p[id],11:F6}  {id,6}  {Quote(model.Tokenizer.Decode([id]))}"));
        }
        return 0;
    }

    /// <summary>The token's text in quotes, with control characters escaped so spaces and newlines stay visible.</summary>
    private static string Quote(string s)
    {
        var b = new StringBuilder("\"");
        foreach (char ch in s)
        {
            b.Append(ch switch
            {
                '\n' => "\\n",
                '\r' => "\\r",
                '\t' => "\\t",
                '"' => "\\\"",
                '\\' => "\\\\",
                _ when char.IsControl(ch) => string.Create(CultureInfo.InvariantCulture, $"\\u{(int)ch:x4}"),
                _ => ch.ToString(),
            });
        }
        return b.Append('"').ToString();
    }
}
