using Assay.Config;
using Assay.Features;
using Assay.Fixtures;
using Assay.Input;
using Assay.Model;
using Assay.Output;
using Assay.Tokenization;
using Assay.Weights;

namespace Assay.Fuzz;

/// <summary>An outcome no loader may have: an exception other than its own, or its own without the file's name.</summary>
public sealed class ContractBrokenException : Exception
{
    /// <summary>Creates the finding.</summary>
    public ContractBrokenException(string message, Exception? inner = null) : base(message, inner) { }
}

/// <summary>
/// The fuzz targets: each writes one input (the fuzzer's bytes) as the file its loader reads, beside fixed valid
/// companion files, runs the loader and uses what it returns. The only outcome allowed for bad input is the loader's
/// own exception, naming the file; anything else escapes as a crash (<see cref="ContractBrokenException"/> or the exception itself).
/// </summary>
public sealed class FuzzTargets
{
    /// <summary>The target names, one per loader (and per text input format).</summary>
    public static readonly IReadOnlyList<string> Names =
        ["safetensors", "index", "config", "vocab", "merges", "tokenizer-json", "tokenizer-model", "lines", "jsonl", "csv", "tsv", "progress", "run-npy"];

    /// <summary>The unfinished run's options: 24 texts, hidden states and conditional means, a commit every 4 rows.</summary>
    /// <remarks>Made on use, never in a static initializer: instrumented engine code may only run inside the fuzzer's loop.</remarks>
    private static RunOptions RunSettings() => new()
    {
        Extraction = new ExtractionOptions { Features = [new HiddenStateFeature(-1), new ConditionalMeanFeature()] },
        CommitRows = 4,
    };

    // A text with letters, digits, spaces, punctuation, non-ASCII and the end-of-text marker, so that an opened
    // tokenizer is used on every pre-tokenizer branch.
    private const string ProbeText = "The hen's 12 eggs — ünïcode, \t tabs\n and <|endoftext|> too!";

    private readonly string _folder;

    /// <summary>Creates the targets' working folder (companion files are written once, here).</summary>
    public FuzzTargets(string folder)
    {
        _folder = folder;
        Directory.CreateDirectory(Path.Combine(folder, "tok-vocab"));
        Directory.CreateDirectory(Path.Combine(folder, "tok-merges"));
        Directory.CreateDirectory(Path.Combine(folder, "tok-json"));
        Directory.CreateDirectory(Path.Combine(folder, "tok-model"));
        Directory.CreateDirectory(Path.Combine(folder, "sharded"));
        SmallVocabulary.WriteVocabAndMerges(Path.Combine(folder, "tok-vocab"));
        SmallVocabulary.WriteVocabAndMerges(Path.Combine(folder, "tok-merges"));
        SafetensorsWriter.Write(Path.Combine(folder, "sharded", "part-1.safetensors"),
            [new RawTensor("wte.weight", "F32", [2, 2], SafetensorsWriter.Encode([1f, 2f, 3f, 4f], "F32"))]);
        SafetensorsWriter.Write(Path.Combine(folder, "sharded", "part-2.safetensors"),
            [new RawTensor("wpe.weight", "BF16", [3], SafetensorsWriter.Encode([0.5f, -1f, 2f], "BF16"))]);
        SyntheticCheckpoint.Write(new CheckpointSpec(), Path.Combine(folder, "model"));
        File.WriteAllLines(Path.Combine(folder, "run-input.txt"), Enumerable.Range(0, 24).Select(i => $"text {i}: the keeper of the light"));
    }

    /// <summary>Runs one target on one input.</summary>
    /// <exception cref="ContractBrokenException">The loader broke its contract.</exception>
    public void Run(string target, byte[] input)
    {
        ArgumentNullException.ThrowIfNull(input);
        switch (target)
        {
            case "safetensors":
                Expect<WeightsFormatException>(Write("model.safetensors", input), Safetensors);
                break;
            case "index":
                Expect<WeightsFormatException>(Write(Path.Combine("sharded", "model.safetensors.index.json"), input), _ => Checkpoint());
                break;
            case "config":
                Expect<ModelConfigException>(Write("config.json", input), p => ModelConfig.Load(p));
                break;
            case "vocab":
                Expect<TokenizerFileException>(Write(Path.Combine("tok-vocab", "vocab.json"), input), _ => Tokenizer("tok-vocab"));
                break;
            case "merges":
                Expect<TokenizerFileException>(Write(Path.Combine("tok-merges", "merges.txt"), input), _ => Tokenizer("tok-merges"));
                break;
            case "tokenizer-json":
                Expect<TokenizerFileException>(Write(Path.Combine("tok-json", "tokenizer.json"), input), _ => Tokenizer("tok-json"));
                break;
            case "tokenizer-model":
                Expect<TokenizerFileException>(Write(Path.Combine("tok-model", "tokenizer.model"), input), _ => Tokenizer("tok-model"));
                break;
            case "lines":
            case "jsonl":
            case "csv":
            case "tsv":
                Expect<TextInputException>(Write("input." + target, input), Records);
                break;
            case "progress":
                Resume(RunFolder.ProgressFile, input);
                break;
            case "run-npy":
                Resume("cmean.npy", input);
                break;
            default:
                throw new ArgumentException($"unknown fuzz target '{target}'; expected one of {string.Join(", ", Names)}", nameof(target));
        }
    }

    private string Write(string name, byte[] input)
    {
        string path = Path.Combine(_folder, name);
        File.WriteAllBytes(path, input);
        return path;
    }

    /// <summary>Runs <paramref name="load"/> on <paramref name="path"/>; only <typeparamref name="TException"/> naming the file (or its folder) is allowed to end it.</summary>
    /// <exception cref="ContractBrokenException">The exception does not name the file.</exception>
    public static void Expect<TException>(string path, Action<string> load) where TException : InvalidInputException
    {
        try
        {
            load(path);
        }
        catch (TException e) when (e.Message.Contains(path, StringComparison.Ordinal) || e.Message.Contains(Path.GetDirectoryName(path)!, StringComparison.Ordinal))
        {
            // The contract: bad input ends in the loader's own exception, naming the file (or its folder).
        }
        catch (TException e)
        {
            throw new ContractBrokenException($"{typeof(TException).Name} does not name {path}: {e.Message}", e);
        }
    }

    private static void Safetensors(string path)
    {
        using SafetensorsFile file = SafetensorsFile.Open(path);
        foreach (TensorInfo t in file.Tensors)
        {
            if (t.DataBegin < 0 || t.DataEnd < t.DataBegin || t.DataEnd > file.FileLength)
            {
                throw new ContractBrokenException($"tensor '{t.Name}' spans [{t.DataBegin}, {t.DataEnd}) in a file of {file.FileLength} bytes");
            }
            if (t.DType.IsParameterType())
            {
                file.ReadFloat32(t, new float[t.ElementCount]);
            }
        }
    }

    private void Checkpoint()
    {
        using SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(Path.Combine(_folder, "sharded"));
        foreach (TensorInfo t in checkpoint.Tensors)
        {
            checkpoint.ReadFloat32(t, new float[t.ElementCount]);
        }
    }

    private void Tokenizer(string folder)
    {
        TextTokenizer tokenizer = TextTokenizer.OpenFolder(Path.Combine(_folder, folder));
        int[] ids = [.. tokenizer.Encode(ProbeText), .. tokenizer.EncodeContinuation(" " + ProbeText)];
        _ = tokenizer.Tokenize(ProbeText);
        foreach (int id in ids)
        {
            if (id < 0 || id >= tokenizer.VocabularySize)
            {
                throw new ContractBrokenException($"Encode gave id {id}; the vocabulary has {tokenizer.VocabularySize}");
            }
        }
        _ = tokenizer.Decode(ids);
    }

    /// <summary>
    /// A copy of the unfinished run with <paramref name="file"/> replaced by the input, resumed: it must finish with
    /// all 24 rows or be refused with a RunFolderException naming the folder.
    /// </summary>
    private void Resume(string file, byte[] input)
    {
        LanguageModel model = LanguageModel.Open(Path.Combine(_folder, "model"));
        string runInput = Path.Combine(_folder, "run-input.txt");
        string interrupted = Path.Combine(_folder, "interrupted");
        if (!File.Exists(Path.Combine(_folder, "interrupted.done")))
        {
            // Made once, at the first execution (the folder outlives the fuzzer's forks): an unfinished run stopped
            // after its second commit, whose files the run-folder targets replace.
            if (Directory.Exists(interrupted))
            {
                Directory.Delete(interrupted, recursive: true);
            }
            using var cancel = new CancellationTokenSource();
            try
            {
                ExtractionRun.Execute(model, runInput, interrupted, RunSettings(), new Stop(p => { if (p.Accepted > 8) { cancel.Cancel(); } }), cancel.Token);
            }
            catch (OperationCanceledException)
            {
                // Stopped as meant: the folder holds 8 committed rows.
            }
            File.WriteAllText(Path.Combine(_folder, "interrupted.done"), "");
        }
        string run = Path.Combine(_folder, "resumed");
        if (Directory.Exists(run))
        {
            Directory.Delete(run, recursive: true);
        }
        Directory.CreateDirectory(run);
        foreach (string f in Directory.GetFiles(interrupted))
        {
            File.Copy(f, Path.Combine(run, Path.GetFileName(f)));
        }
        File.WriteAllBytes(Path.Combine(run, file), input);
        Expect<RunFolderException>(Path.Combine(run, file), _ =>
        {
            RunSummary s = ExtractionRun.Execute(model, runInput, run, RunSettings() with { Resume = true });
            if (s.Accepted != 24)
            {
                throw new ContractBrokenException($"the resumed run holds {s.Accepted} rows; the input has 24");
            }
        });
    }

    private sealed class Stop(Action<RunProgress> report) : IProgress<RunProgress>
    {
        public void Report(RunProgress value) => report(value);
    }

    private static void Records(string path)
    {
        using TextInputReader reader = TextInputReader.Open(path);
        long line = 0;
        foreach (InputRecord r in reader.Records())
        {
            if (r.Line <= line || (r.Accepted && string.IsNullOrEmpty(r.Text)) || (!r.Accepted && r.Text != null))
            {
                throw new ContractBrokenException($"record at line {r.Line} (after line {line}): accepted {r.Accepted}, text {(r.Text == null ? "null" : r.Text.Length.ToString(System.Globalization.CultureInfo.InvariantCulture))}");
            }
            line = r.Line;
        }
    }
}
