using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Features;
using Assay.Input;
using Assay.Model;
using Assay.Output;

namespace Assay.Evaluation;

/// <summary>
/// Runs a study grid into a folder: the subsampled task (data/), one extraction run per model, prompt and split
/// (runs/MODEL/PROMPT/train|test, resumable), and each cell's result (cells/*.json). A rerun with the same study file
/// reuses what is there, so an interrupted study goes on where it stopped; a folder made from another study file is
/// refused unless overwrite is asked for.
/// </summary>
public static class Study
{
    private static readonly JsonSerializerOptions Indented = new() { WriteIndented = true };

    /// <summary>Runs (or continues) the study.</summary>
    /// <exception cref="StudyException">The folder holds another study or foreign files, a task file has a bad record, or a test label is unknown.</exception>
    public static StudyResult Run(StudySpec spec, string outFolder, bool overwrite = false, IProgress<string>? log = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(spec);
        ArgumentNullException.ThrowIfNull(outFolder);
        outFolder = Path.GetFullPath(outFolder);
        // The folder is judged, then everything the study reads is checked, and only then is anything deleted or written.
        string[]? startOver = Claim(spec, outFolder, overwrite);
        Check(spec);
        if (startOver != null)
        {
            StartOver(spec, outFolder, startOver);
        }
        string data = Directory.CreateDirectory(Path.Combine(outFolder, StudyFolder.DataFolder)).FullName;
        string trainFile = Subsample(spec.Train, spec.TrainEvery, spec.Probe.Folds, Path.Combine(data, "train.jsonl"));
        string testFile = Subsample(spec.Test, spec.TestEvery, 1, Path.Combine(data, "test.jsonl"));
        string cells = Directory.CreateDirectory(Path.Combine(outFolder, StudyFolder.CellsFolder)).FullName;
        Verbalizer? verbalizer = spec.Verbalizer == null ? null : Verbalizer.Load(spec.Verbalizer);
        string[] testTexts = [.. ReadRecords(testFile).Select(r => r.Text!)];

        var models = new List<StudyModel>();
        var results = new List<StudyCell>();
        LabelIndex classes = LabelIndex.Sorted(ReadRecords(trainFile).Select(r => r.Label));
        foreach ((string name, string folder) in spec.Models)
        {
            LanguageModel model = LanguageModel.Open(folder);
            CrossEntropyResult ce = Cached(Path.Combine(cells, name + ".cross-entropy.json"), () => CrossEntropy.Score(model, testTexts), WriteCrossEntropy, ReadCrossEntropy);
            models.Add(new StudyModel(name, folder, ce));
            log?.Report(string.Create(CultureInfo.InvariantCulture, $"{name}: cross-entropy {ce.NatsPerToken:F4} nats/token on {ce.Texts:N0} test texts"));
            foreach ((string prompt, string template) in spec.Prompts)
            {
                cancellationToken.ThrowIfCancellationRequested();
                (FeatureRequest[] requests, Dictionary<string, string> stems) = Requests(spec, model, verbalizer);
                string runs = Path.Combine(outFolder, StudyFolder.RunsFolder, name, prompt);
                var options = new RunOptions
                {
                    Extraction = new ExtractionOptions { Prompt = PromptTemplate.Parse(template), Features = requests },
                    Format = InputFormat.JsonLines,
                    Resume = true,
                    Strict = true,
                };
                foreach ((string split, string file) in new[] { ("train", trainFile), ("test", testFile) })
                {
                    RunSummary s = ExtractionRun.Execute(model, file, Path.Combine(runs, split), options, cancellationToken: cancellationToken);
                    log?.Report(string.Create(CultureInfo.InvariantCulture,
                        $"{name}/{prompt}/{split}: {s.Accepted:N0} rows{(s.AlreadyComplete ? " (already extracted)" : $" in {s.Elapsed.TotalSeconds:F0} s")}"));
                }
                foreach (string feature in spec.Features)
                {
                    cancellationToken.ThrowIfCancellationRequested();
                    string cellFile = Path.Combine(cells, $"{name}.{prompt}.{feature.Replace(':', '_')}.json");
                    StudyCell cell = Cached(cellFile,
                        () => feature == "zero-shot"
                            ? ZeroShot(name, prompt, Path.Combine(runs, "test"), verbalizer!, classes)
                            : Probe(name, prompt, feature, stems[feature], Path.Combine(runs, "train"), Path.Combine(runs, "test"), spec.Probe),
                        c => WriteCell(c, classes.Classes), ReadCell);
                    results.Add(cell);
                    log?.Report(string.Create(CultureInfo.InvariantCulture,
                        $"{name}/{prompt}/{feature}: accuracy {cell.Score.Accuracy:P1} ({cell.Score.AccuracyLow:P1} – {cell.Score.AccuracyHigh:P1}), log loss {cell.Score.LogLoss:F3}{(cell.InverseRegularization is double c ? $", C = {c:G3}" : "")}"));
                }
            }
        }
        return new StudyResult(spec, classes.Classes, Prior(classes, trainFile, testFile), models, results, Curves(spec, models, results));
    }

    /// <summary>
    /// Everything a study reads, checked before anything is computed or written: both task files (every record, a
    /// label on each), the verbalizer against the training labels (for zero-shot), and every model folder (config,
    /// tokenizer, tensors against the config, and each feature kind against its layers), so a bad last model cannot
    /// stop a study after hours of work on the first.
    /// </summary>
    private static void Check(StudySpec spec)
    {
        LabelIndex trainLabels = LabelIndex.Sorted(ReadRecords(spec.Train).Select(r => r.Label));
        string? unknown = trainLabels.FirstUnknown(ReadRecords(spec.Test).Select(r => r.Label));
        if (unknown != null)
        {
            throw new StudyException(spec.Test, $"test label \"{unknown}\" has no training rows in {spec.Train}");
        }
        if (spec.Verbalizer != null)
        {
            Verbalizer verbalizer = Verbalizer.Load(spec.Verbalizer);
            string? missing = trainLabels.Classes.Except(verbalizer.Labels, StringComparer.Ordinal)
                .Concat(verbalizer.Labels.Except(trainLabels.Classes, StringComparer.Ordinal)).FirstOrDefault();
            if (missing != null && spec.Features.Contains("zero-shot"))
            {
                throw new StudyException(spec.Verbalizer, $"the verbalizer's labels and the task's differ (\"{missing}\" is in one only); zero-shot needs the same labels");
            }
        }
        foreach ((string name, string folder) in spec.Models)
        {
            string configPath = Path.Combine(folder, Config.ModelConfig.FileName);
            Config.ModelConfig config = Config.ModelConfig.Load(configPath);
            _ = Tokenization.TextTokenizer.OpenFolder(folder);
            using (Weights.SafetensorsCheckpoint checkpoint = Weights.SafetensorsCheckpoint.Open(folder))
            {
                LanguageModel.CheckCheckpoint(checkpoint, config, configPath);
            }
            foreach (string feature in spec.Features.Where(f => f.StartsWith(HiddenStateFeature.Name, StringComparison.Ordinal)))
            {
                try
                {
                    HiddenStateFeature.ResolveLayer(((HiddenStateFeature)FeatureSpec.Parse(feature, config.Layers).Single()).Layer, config.Layers);
                }
                catch (ArgumentException)
                {
                    throw new StudyException(spec.Path, string.Create(CultureInfo.InvariantCulture, $"features: {feature}: model \"{name}\" ({folder}) has layers 0 … {config.Layers}"));
                }
            }
        }
    }

    private static ClassificationReport Prior(LabelIndex classes, string trainFile, string testFile)
    {
        double[] frequency = new double[classes.Count];
        string[] train = [.. ReadRecords(trainFile).Select(r => r.Label)];
        foreach (int label in classes.Indices(train))
        {
            frequency[label] += 1.0 / train.Length;
        }
        int[] truth = [.. ReadRecords(testFile).Select(r => classes.TryGetIndex(r.Label, out int i) ? i
            : throw new StudyException(testFile, $"test label \"{r.Label}\" has no training rows"))];
        double[] p = new double[truth.Length * classes.Count];
        for (int i = 0; i < truth.Length; i++)
        {
            frequency.CopyTo(p, i * classes.Count);
        }
        return ClassificationReport.Score(p, truth, classes.Count);
    }

    /// <summary>Test log loss against cross-entropy per prompt and probed feature (not zero-shot, which fits nothing), where at least 3 models differ in cross-entropy.</summary>
    private static List<StudyCurve> Curves(StudySpec spec, List<StudyModel> models, List<StudyCell> cells)
    {
        var curves = new List<StudyCurve>();
        if (models.Select(m => m.CrossEntropy.NatsPerToken).Distinct().Count() < 3)
        {
            return curves;
        }
        foreach ((string prompt, _) in spec.Prompts)
        {
            foreach (string feature in spec.Features.Where(f => f != "zero-shot"))
            {
                var points = models.Select(m => (m.CrossEntropy.NatsPerToken,
                    cells.Single(c => c.Model == m.Name && c.Prompt == prompt && c.Feature == feature).Score.LogLoss)).ToList();
                curves.Add(new StudyCurve(prompt, feature, points, SquareRootFit.Fit([.. points.Select(p => p.Item1)], [.. points.Select(p => p.Item2)])));
            }
        }
        return curves;
    }

    private static (FeatureRequest[] Requests, Dictionary<string, string> Stems) Requests(StudySpec spec, LanguageModel model, Verbalizer? verbalizer)
    {
        var requests = new List<FeatureRequest>();
        var stems = new Dictionary<string, string>(StringComparer.Ordinal);
        int layers = model.Config.Layers;
        foreach (string feature in spec.Features)
        {
            // zero-shot reads the verbalizer's word probabilities: the words kind, computed once for both.
            string kind = feature == "zero-shot" ? WordListFeature.ListName : feature;
            FeatureRequest request = FeatureSpec.Parse(kind, layers, _ => verbalizer!.AllWords).Single();
            if (request is HiddenStateFeature h)
            {
                try
                {
                    // The study's runs name the layer itself, so a run folder says which layer it holds.
                    request = h with { Layer = HiddenStateFeature.ResolveLayer(h.Layer, layers) };
                }
                catch (ArgumentException)
                {
                    throw new StudyException(spec.Path, string.Create(CultureInfo.InvariantCulture, $"features: {feature}: the models have layers 0 … {layers}"));
                }
            }
            FeatureRequest? same = requests.Find(r => r.GetType() == request.GetType() && r.Spec == request.Spec);
            if (same == null)
            {
                requests.Add(request);
            }
            FeatureRequest kept = same ?? request;
            stems[feature] = kept.Outputs(ModelShape.Of(model.Config))[kept.PrimaryOutput].Name;
        }
        return ([.. requests], stems);
    }

    private static StudyCell Probe(string model, string prompt, string feature, string stem, string trainRun, string testRun, ProbeOptions options)
    {
        RunFeatures train = RunFeatures.Load(trainRun, stem), test = RunFeatures.Load(testRun, stem);
        LinearProbe probe = LinearProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, options);
        ClassificationReport score = ProbeScorer.Score(probe, test, testRun).Report;
        return new StudyCell(model, prompt, feature, train.Width, train.Rows, probe.InverseRegularization, score);
    }

    /// <summary>The verbalizer's label distribution (as assay zero-shot reports it), in the probe's class order.</summary>
    private static StudyCell ZeroShot(string model, string prompt, string testRun, Verbalizer verbalizer, LabelIndex classes)
    {
        if (!verbalizer.Labels.Order(StringComparer.Ordinal).SequenceEqual(classes.Classes, StringComparer.Ordinal))
        {
            string missing = classes.Classes.Except(verbalizer.Labels, StringComparer.Ordinal).Concat(verbalizer.Labels.Except(classes.Classes, StringComparer.Ordinal)).First();
            throw new StudyException(testRun, $"the verbalizer's labels and the training labels differ (\"{missing}\" is in one only); zero-shot needs the same labels");
        }
        RunFeatures test = RunFeatures.Load(testRun, "words.first");
        string? unknown = classes.FirstUnknown(test.Labels);
        if (unknown != null)
        {
            throw new StudyException(testRun, $"test label \"{unknown}\" is not in the verbalizer");
        }
        var scorer = new ZeroShotScorer(verbalizer, classes, logLikelihoods: false);
        int[] truth = classes.Indices(test.Labels);
        float[] row = new float[test.Width];
        for (int i = 0; i < test.Rows; i++)
        {
            for (int j = 0; j < test.Width; j++)
            {
                row[j] = (float)test.Values[(i * test.Width) + j];
            }
            scorer.Add(row, truth[i]);
        }
        return new StudyCell(model, prompt, "zero-shot", 0, 0, null, scorer.Report());
    }

    /// <summary>
    /// What the folder holds: foreign files, another study (without overwrite) and parts without a study file (without
    /// overwrite) are refused; the same study is continued (null); anything else starts over (the entries to remove).
    /// Nothing is changed here but creating the folder.
    /// </summary>
    private static string[]? Claim(StudySpec spec, string folder, bool overwrite)
    {
        Directory.CreateDirectory(folder);
        string specPath = Path.Combine(folder, StudyFolder.SpecFile);
        JsonObject current = spec.ToJson();
        string[] entries = [.. Directory.EnumerateFileSystemEntries(folder).Select(e => Path.GetFileName(e)!)];
        if (entries.Any(e => !StudyFolder.Owns(e)))
        {
            throw new StudyException(folder, "holds files that are not part of a study; give an empty or new folder");
        }
        if (File.Exists(specPath) && !overwrite)
        {
            JsonNode? stored = JsonNode.Parse(File.ReadAllBytes(specPath));
            if (!JsonNode.DeepEquals(stored, current))
            {
                string field = current.Select(p => p.Key).FirstOrDefault(k => !JsonNode.DeepEquals(stored?[k], current[k])) ?? "study";
                throw new StudyException(folder, $"holds a study made with a different {field.Replace('_', ' ')}; give another folder, or pass --overwrite to start over");
            }
            return null;
        }
        if (!overwrite && entries.Length > 0)
        {
            throw new StudyException(folder, $"holds parts of a study without its {StudyFolder.SpecFile}; pass --overwrite to start over");
        }
        return entries;
    }

    /// <summary>Starting over: the earlier study's parts and reports go, so nothing stale stays beside the new results.</summary>
    private static void StartOver(StudySpec spec, string folder, string[] entries)
    {
        foreach (string name in entries)
        {
            string path = Path.Combine(folder, name);
            if (Directory.Exists(path))
            {
                Directory.Delete(path, recursive: true);
            }
            else
            {
                File.Delete(path);
            }
        }
        AtomicFile.WriteText(Path.Combine(folder, StudyFolder.SpecFile), spec.ToJson().ToJsonString(Indented) + "\n");
    }

    /// <summary>
    /// Every k-th record of each label of a task file (in file order), and at least the first <paramref name="least"/>
    /// of a label that has them, so cross-validation sees every class; written as JSONL (id, text, label). A bad record
    /// stops the study.
    /// </summary>
    private static string Subsample(string source, int every, int least, string target)
    {
        if (File.Exists(target))
        {
            return target;
        }
        var seen = new Dictionary<string, int>(StringComparer.Ordinal);
        using (var w = new StringWriter(CultureInfo.InvariantCulture))
        {
            foreach (InputRecord r in ReadRecords(source))
            {
                int n = seen.GetValueOrDefault(r.Label);
                seen[r.Label] = n + 1;
                if (n % every == 0 || n < least)
                {
                    w.Write(new JsonObject { ["id"] = r.Id, ["text"] = r.Text, ["label"] = r.Label }.ToJsonString());
                    w.Write('\n');
                }
            }
            AtomicFile.WriteText(target, w.ToString());
        }
        return target;
    }

    private static IEnumerable<InputRecord> ReadRecords(string path)
    {
        using TextInputReader reader = TextInputReader.Open(path, InputFormat.Auto, new InputFields { LabelRequired = true });
        foreach (InputRecord r in reader.Records())
        {
            yield return r.Accepted ? r : throw new StudyException(path, $"line {r.Line}: {r.Rejection}");
        }
    }

    private static T Cached<T>(string path, Func<T> compute, Func<T, JsonObject> write, Func<JsonObject, T> read)
    {
        if (File.Exists(path))
        {
            return read(JsonNode.Parse(File.ReadAllBytes(path))!.AsObject());
        }
        T value = compute();
        AtomicFile.WriteText(path, write(value).ToJsonString(Indented) + "\n");
        return value;
    }

    private static JsonObject WriteCrossEntropy(CrossEntropyResult r) => new()
    {
        ["texts"] = r.Texts,
        ["tokens"] = r.Tokens,
        ["bytes"] = r.Bytes,
        ["nats"] = r.Nats,
    };

    private static CrossEntropyResult ReadCrossEntropy(JsonObject o) =>
        new(o["texts"]!.GetValue<long>(), o["tokens"]!.GetValue<long>(), o["bytes"]!.GetValue<long>(), o["nats"]!.GetValue<double>());

    private static JsonObject WriteCell(StudyCell c, IReadOnlyList<string> classes) => new()
    {
        ["model"] = c.Model,
        ["prompt"] = c.Prompt,
        ["feature"] = c.Feature,
        ["width"] = c.Width,
        ["train_rows"] = c.TrainRows,
        ["c"] = c.InverseRegularization,
        ["score"] = c.Score.ToJson(classes),
    };

    private static StudyCell ReadCell(JsonObject o) =>
        new(o["model"]!.GetValue<string>(), o["prompt"]!.GetValue<string>(), o["feature"]!.GetValue<string>(),
            o["width"]!.GetValue<int>(), o["train_rows"]!.GetValue<int>(), o["c"]?.GetValue<double>(), ClassificationReport.FromJson(o["score"]!.AsObject()));
}
