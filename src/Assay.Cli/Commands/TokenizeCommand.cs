using System.CommandLine;
using System.Globalization;
using System.Text.Json.Nodes;
using Assay.Input;
using Assay.Tokenization;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay tokenize "&lt;text&gt;" | --input &lt;file&gt; [--model &lt;dir&gt;] [--bos auto|always|never] [--json]</c>: the ids,
/// token strings and UTF-8 byte ranges the model's tokenizer gives, so a user sees what the model sees and where a cut
/// by tokens falls. Reads the tokenizer files only, not the weights.
/// </summary>
internal static class TokenizeCommand
{
    public static Command Create()
    {
        var folder = ModelOption.Create();
        var text = new Argument<string?>("text") { Description = "The text to tokenize (or --input).", Arity = ArgumentArity.ZeroOrOne };
        var input = new Option<FileInfo?>("--input") { Description = "Tokenize every record of a text input (lines, JSONL, CSV or TSV; - for standard input)." };
        var json = new Option<bool>("--json") { Description = "Write JSON (one object per record with --input) instead of the table." };
        var shared = new SharedOptions();
        var command = new Command("tokenize", "Show the token ids, token strings and byte ranges of a text under a model's tokenizer.")
        {
            text, folder, input, json, shared.Bos,
        };
        shared.AddInput(command, fields: false);
        command.SetAction(r => CommandRunner.Run(() =>
        {
            FileInfo? file = r.GetValue(input);
            return Run(r.GetValue(folder)!.FullName, r.GetValue(text), file is null ? null : SharedOptions.InputPath(file),
                Spellings.Parse<InputFormat>("--format", r.GetValue(shared.Format)!), r.GetValue(shared.TextField)!,
                r.GetValue(shared.Bos)!, r.GetValue(json), Console.Out);
        }));
        return command;
    }

    internal static int Run(string folder, string? text, string? input, InputFormat format, string textField, string bos, bool json, TextWriter o)
    {
        if ((text is null) == (input is null))
        {
            throw new ArgumentException(text is null ? "give a text to tokenize, or --input FILE" : "give a text or --input FILE, not both");
        }
        BeginningOfSequence policy = Spellings.Parse<BeginningOfSequence>("--bos", bos);
        if (!Directory.Exists(folder))
        {
            throw new DirectoryNotFoundException($"{folder}: no such model folder");
        }
        TextTokenizer tokenizer = TextTokenizer.OpenFolder(folder);
        int[] start = tokenizer.SequenceStart(policy);
        if (text is not null)
        {
            Write(tokenizer, start, policy, null, text, json, o);
            return 0;
        }
        using TextInputReader reader = TextInputReader.Open(input!, format, new InputFields { Text = textField });
        long accepted = 0;
        foreach (InputRecord record in reader.Records())
        {
            if (record.Accepted)
            {
                Write(tokenizer, start, policy, record.Id, record.Text!, json, o);
                accepted++;
            }
        }
        if (accepted == 0)
        {
            throw new ArgumentException($"{input}: no record with a \"{textField}\" text");
        }
        return 0;
    }

    private static void Write(TextTokenizer tokenizer, int[] start, BeginningOfSequence policy, string? id, string text, bool json, TextWriter o)
    {
        var tokens = new List<TokenSpan>(start.Select(s => new TokenSpan(s, tokenizer.TokenText(s), 0, 0)));
        tokens.AddRange(tokenizer.Tokenize(text));
        CultureInfo inv = CultureInfo.InvariantCulture;
        if (json)
        {
            var obj = new JsonObject();
            if (id is not null)
            {
                obj["id"] = id;
            }
            obj["tokenizer"] = tokenizer.Source;
            obj["bos"] = new JsonObject { ["policy"] = Spellings.Of(policy), ["added"] = start.Length > 0 };
            obj["count"] = tokens.Count;
            obj["tokens"] = new JsonArray([.. tokens.Select(t => new JsonObject { ["id"] = t.Id, ["token"] = t.Text, ["start"] = t.ByteStart, ["end"] = t.ByteEnd })]);
            o.WriteLine(obj.ToJsonString(JsonOutput.Options));
            return;
        }
        if (id is not null)
        {
            o.WriteLine($"record {id}");
        }
        o.WriteLine(string.Create(inv, $"{tokens.Count:N0} tokens ({tokenizer.Source}; --bos {Spellings.Of(policy)}: {(start.Length > 0 ? $"starts with {tokenizer.TokenText(start[0])}" : "nothing added")})"));
        o.WriteLine("     #      id  bytes          token");
        for (int k = 0; k < tokens.Count; k++)
        {
            TokenSpan t = tokens[k];
            o.WriteLine(string.Create(inv, $"{k,6}  {t.Id,6}  {$"{t.ByteStart}–{t.ByteEnd}",-13}  {System.Text.Json.JsonSerializer.Serialize(t.Text, JsonOutput.Options)}"));
        }
    }
}
