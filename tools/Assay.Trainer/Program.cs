using System.Globalization;
using Assay.Fixtures;
using Assay.Tokenization;
using Assay.Trainer;

// assay-trainer <corpus-dir> <out-dir> [--steps N] [--batch B] [--width D] [--layers L] [--heads H] [--context T] [--lr X] [--seed S] [--threads N]
// Trains a GPT-2-architecture model with the GPT-2 tokenizer on every *.txt of the corpus folder (one document per
// line), writes checkpoints of the initialization and after 5 %, 25 % and 100 % of the steps (float16 safetensors, config.json, vocab.json,
// merges.txt) and training-log.csv, and prints the validation cross-entropy against a unigram model's.
if (args.Length < 2)
{
    Console.Error.WriteLine("usage: assay-trainer <corpus-dir> <out-dir> [--steps N] [--batch B] [--width D] [--layers L] [--heads H] [--context T] [--lr X] [--seed S] [--threads N]");
    return 2;
}
Allocator.KeepFreedMemory();
var o = new TrainingOptions { Spec = new CheckpointSpec { Width = 192, Layers = 4, Heads = 4, Context = 128, Vocabulary = 50257, DType = "F16", Tokenizer = TokenizerFiles.Gpt2, MaskBuffers = false } };
for (int i = 2; i + 1 < args.Length; i += 2)
{
    string v = args[i + 1];
    int n() => int.Parse(v, CultureInfo.InvariantCulture);
    o = args[i] switch
    {
        "--steps" => o with { Steps = n() },
        "--batch" => o with { Batch = n() },
        "--width" => o with { Spec = o.Spec with { Width = n() } },
        "--layers" => o with { Spec = o.Spec with { Layers = n() } },
        "--heads" => o with { Spec = o.Spec with { Heads = n() } },
        "--context" => o with { Spec = o.Spec with { Context = n() } },
        "--lr" => o with { PeakLearningRate = double.Parse(v, CultureInfo.InvariantCulture) },
        "--seed" => o with { Seed = ulong.Parse(v, CultureInfo.InvariantCulture) },
        "--threads" => o with { Threads = n() },
        "--validation-windows" => o with { ValidationWindows = n() },
        _ => throw new ArgumentException($"unknown option {args[i]}"),
    };
}
string[] files = [.. Directory.GetFiles(args[0], "*.txt").Order(StringComparer.Ordinal)];
if (files.Length == 0)
{
    Console.Error.WriteLine($"assay-trainer: no *.txt files in {args[0]}");
    return 2;
}
Directory.CreateDirectory(args[1]);
var corpus = Corpus.Load(files, TextTokenizer.EmbeddedGpt2(), o.Spec.Context);
foreach ((string file, long tokens) in corpus.TokensPerFile)
{
    Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{file}: {tokens:N0} tokens"));
}
double unigram = corpus.UnigramCrossEntropy(o.Spec.Vocabulary);
Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
    $"train {corpus.Train.Length:N0} tokens ({corpus.TrainWindows:N0} windows), validation {corpus.Validation.Length:N0}; unigram validation cross-entropy {unigram:F4} nats/token"));
var clock = System.Diagnostics.Stopwatch.StartNew();
using var log = new StreamWriter(Path.Combine(args[1], "training-log.csv"));
IReadOnlyList<LogLine> lines = Training.Run(corpus, o, args[1], log);
foreach (LogLine l in lines.Where(l => l.ValidationLoss != null))
{
    Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"step {l.Step}: validation cross-entropy {l.ValidationLoss:F4} nats/token"));
}
Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{o.Steps} steps of {o.Batch}×{o.Spec.Context} tokens in {clock.Elapsed.TotalMinutes:F1} min; unigram {unigram:F4}"));
return 0;
