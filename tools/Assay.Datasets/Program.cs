using System.Globalization;
using System.Text;
using System.Text.Json;
using Assay.Datasets;

// assay-datasets wordnet-supersense <out-dir> [--data-noun PATH]
if (args.Length is not (2 or 4) || args[0] != "wordnet-supersense" || (args.Length == 4 && args[2] != "--data-noun"))
{
    Console.Error.WriteLine("usage: assay-datasets wordnet-supersense <out-dir> [--data-noun /usr/share/wordnet/data.noun]");
    return 2;
}
string output = args[1];
string source = args.Length == 4 ? args[3] : WordNetNouns.DefaultPath;
Directory.CreateDirectory(output);
var counts = new SortedDictionary<string, int[]>(StringComparer.Ordinal);   // label → [train, test]
int trainingText = 0;
using (var train = new StreamWriter(Path.Combine(output, "train.jsonl")))
using (var test = new StreamWriter(Path.Combine(output, "test.jsonl")))
using (var glosses = new StreamWriter(Path.Combine(output, "training-text.txt")))
{
    foreach (NounSynset s in WordNetNouns.Read(source))
    {
        (bool evaluation, bool isTest) = WordNetNouns.Split(s.Offset);
        if (!evaluation)
        {
            glosses.WriteLine(s.Definition);
            trainingText++;
            continue;
        }
        (isTest ? test : train).WriteLine(JsonSerializer.Serialize(new { id = "n" + s.Offset, text = s.Definition, label = s.Supersense, word = s.FirstWord }));
        if (!counts.TryGetValue(s.Supersense, out int[]? c))
        {
            counts[s.Supersense] = c = new int[2];
        }
        c[isTest ? 1 : 0]++;
    }
}

var readme = new StringBuilder();
CultureInfo inv = CultureInfo.InvariantCulture;
readme.AppendLine("# WordNet 3.0 noun definitions by supersense");
readme.AppendLine();
readme.AppendLine(inv, $"Built by `assay-datasets wordnet-supersense` from `{source}` (Debian package wordnet-base).");
readme.AppendLine("Each line of train.jsonl / test.jsonl: `id` (n + synset offset), `text` (the definition: the gloss up to its first");
readme.AppendLine("quoted example), `label` (the supersense, WordNet's lexicographer file), `word` (the synset's first word).");
readme.AppendLine("Split by a fixed hash of the synset offset: SHA-256(\"wordnet-3.0/noun/\" + offset), first byte even = training-text");
readme.AppendLine("half (training-text.txt: definitions a model may be trained on), odd = evaluation half, of which second byte < 52 = test.");
readme.AppendLine();
readme.AppendLine(inv, $"Counts: {trainingText:N0} training-text definitions; evaluation half {counts.Values.Sum(c => c[0] + c[1]):N0} = {counts.Values.Sum(c => c[0]):N0} train + {counts.Values.Sum(c => c[1]):N0} test.");
readme.AppendLine();
readme.AppendLine("| label | train | test |");
readme.AppendLine("|---|---:|---:|");
foreach ((string label, int[] c) in counts)
{
    readme.AppendLine(inv, $"| {label} | {c[0]:N0} | {c[1]:N0} |");
}
readme.AppendLine();
// The WordNet licence asks for its notice on every copy: the package's copyright file goes beside the data.
const string Notice = "/usr/share/doc/wordnet-base/copyright";
if (File.Exists(Notice))
{
    File.Copy(Notice, Path.Combine(output, "LICENSE-WordNet.txt"), overwrite: true);
}
readme.AppendLine(inv, $"Licence: the WordNet 3.0 licence (permissive, with a notice to keep): {(File.Exists(Notice) ? "LICENSE-WordNet.txt, copied from " + Notice : "see " + Notice + " of the wordnet-base package")}.");
File.WriteAllText(Path.Combine(output, "README.md"), readme.ToString());
Console.WriteLine(string.Create(inv, $"wrote {output}: {counts.Values.Sum(c => c[0]):N0} train + {counts.Values.Sum(c => c[1]):N0} test rows in {counts.Count} supersenses; {trainingText:N0} training-text definitions"));
return 0;
