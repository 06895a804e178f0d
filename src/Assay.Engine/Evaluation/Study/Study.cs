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
/// (runs/MODEL/PROMPT/train|test, resumable), and each cell's result (cells/*.json). Every part stores the inputs it
/// was computed from (model file hashes, template, feature, data hashes, probe settings, verbalizer hash), and a rerun
/// reuses a part only when those are unchanged: an interrupted study goes on where it stopped, and a study file edited
/// after a partial run keeps the cells whose inputs did not change. A folder made from another study file is refused
/// unless overwrite is asked for.
/// </summary>
public static partial class Study
{
    private static readonly JsonSerializerOptions Indented = new() { WriteIndented = true };

    /// <summary>Runs (or continues) the study.</summary>
    /// <param name="spec">The study.</param>
    /// <param name="outFolder">The study folder.</param>
    /// <param name="overwrite">Start over in a folder that holds a study made from another study file.</param>
    /// <param name="log">Told one line per finished step (and whether it was kept from an earlier run).</param>
    /// <param name="progress">Told within each step: rows or texts done of all, tokens, time.</param>
    /// <param name="cancellationToken">Stops between batches; a rerun continues.</param>
    /// <exception cref="StudyException">The folder holds another study or foreign files, a task file has a bad record, or a test label is unknown.</exception>
    public static StudyResult Run(StudySpec spec, string outFolder, bool overwrite = false, IProgress<string>? log = null,
        IProgress<StudyProgress>? progress = null, CancellationToken cancellationToken = default) =>
        Run(spec, outFolder, overwrite, log, progress, ExtractionRun.EngineVersion, cancellationToken);

    /// <summary>
    /// <see cref="Run(StudySpec, string, bool, IProgress{string}?, IProgress{StudyProgress}?, CancellationToken)"/> as
    /// engine <paramref name="engineVersion"/>: every part's inputs name the engine and its kernel path, so parts made
    /// by another engine (an upgrade, another machine's kernels) are computed again, never mixed with this one's.
    /// </summary>
    internal static StudyResult Run(StudySpec spec, string outFolder, bool overwrite, IProgress<string>? log,
        IProgress<StudyProgress>? progress, string engineVersion, CancellationToken cancellationToken)
    {
        ArgumentNullException.ThrowIfNull(spec);
        ArgumentNullException.ThrowIfNull(outFolder);
        outFolder = Path.GetFullPath(outFolder);
        using FolderLock folderLock = FolderLock.Acquire(outFolder);
        // The folder is judged, then everything the study reads is checked, and only then is anything deleted or written.
        string[]? startOver = Claim(spec, outFolder, overwrite, log);
        Check(spec);
        if (startOver != null)
        {
            StartOver(spec, outFolder, startOver);
        }
        JsonObject engine = ClaimEngine(outFolder, engineVersion, log);
        string data = Directory.CreateDirectory(Path.Combine(outFolder, StudyFolder.DataFolder)).FullName;
        string trainFile = Subsample(spec.Train, spec.TrainEvery, spec.Probe.Folds, Path.Combine(data, "train.jsonl"));
        string testFile = Subsample(spec.Test, spec.TestEvery, 1, Path.Combine(data, "test.jsonl"));
        string cells = Directory.CreateDirectory(Path.Combine(outFolder, StudyFolder.CellsFolder)).FullName;
        Verbalizer? verbalizer = spec.Verbalizer == null ? null : Verbalizer.Load(spec.Verbalizer);
        string[] testTexts = [.. ReadRecords(testFile).Select(r => r.Text!)];
        long trainRows = ReadRecords(trainFile).LongCount();
        var dataInputs = new JsonObject { ["train"] = FileDigest.Sha256(trainFile), ["test"] = FileDigest.Sha256(testFile) };
        string? verbalizerSha = spec.Verbalizer == null ? null : FileDigest.Sha256(spec.Verbalizer);

        int probingSteps = spec.Models.Sum(m => spec.Prompts.Count * (
            (spec.Layers ? Config.ModelConfig.Load(Path.Combine(m.Folder, Config.ModelConfig.FileName)).Layers + 1 : 0)
            + (spec.Control == null ? 0 : spec.Mlp > 0 ? 2 : 1)));
        var steps = new StepTracker(progress, (spec.Models.Count * (1 + (spec.Prompts.Count * (2 + spec.Features.Count)))) + probingSteps);
        var models = new List<StudyModel>();
        var results = new List<StudyCell>();
        var layerCells = new List<StudyCell>();
        var selectivity = new List<StudySelectivity>();
        var comparisons = new List<StudyComparison>();
        LabelIndex classes = LabelIndex.Sorted(ReadRecords(trainFile).Select(r => r.Label));
        foreach ((string name, string folder) in spec.Models)
        {
            LanguageModel model = LanguageModel.Open(folder);
            var modelInputs = new JsonObject
            {
                ["files"] = new JsonArray([.. model.Files.Select(f => new JsonObject { ["name"] = f.Name, ["bytes"] = f.Bytes, ["sha256"] = f.Sha256 })]),
                ["engine"] = engine.DeepClone(),
            };
            steps.Begin(name + "/cross-entropy");
            var ceInputs = new JsonObject { ["model"] = modelInputs.DeepClone(), ["test"] = dataInputs["test"]!.DeepClone() };
            CrossEntropyResult ce = Cached(Path.Combine(cells, name + ".cross-entropy.json"), ceInputs,
                () => CrossEntropy.Score(model, testTexts, progress: steps.Relay<ExtractionProgress>(p => (p.Rows, testTexts.Length, "texts", p.Tokens))),
                WriteCrossEntropy, ReadCrossEntropy, out bool ceKept);
            models.Add(new StudyModel(name, folder, ce));
            log?.Report(string.Create(CultureInfo.InvariantCulture, $"{name}: cross-entropy {ce.NatsPerToken:F4} nats/token on {ce.Texts:N0} test texts{Kept(ceKept)}"));
            foreach ((string prompt, string template) in spec.Prompts)
            {
                cancellationToken.ThrowIfCancellationRequested();
                (FeatureRequest[] requests, Dictionary<string, FeatureRequest> byFeature) = Requests(spec, model, verbalizer);
                string runs = Path.Combine(outFolder, StudyFolder.RunsFolder, name, prompt);
                var runInputs = new JsonObject
                {
                    ["model"] = modelInputs.DeepClone(),
                    ["template"] = template,
                    ["features"] = new JsonArray([.. requests.Select(r => r.Describe())]),
                    ["data"] = dataInputs.DeepClone(),
                };
                ClaimRuns(runs, runInputs);
                var options = new RunOptions
                {
                    Extraction = new ExtractionOptions { Prompt = PromptTemplate.Parse(template), Features = requests },
                    Format = InputFormat.JsonLines,
                    Resume = true,
                    Strict = true,
                };
                foreach ((string split, string file, long rows) in new[] { ("train", trainFile, trainRows), ("test", testFile, testTexts.LongLength) })
                {
                    steps.Begin($"{name}/{prompt}/{split}");
                    RunSummary s = ExtractionRun.Execute(model, file, Path.Combine(runs, split), options,
                        steps.Relay<RunProgress>(p => (p.Accepted, rows, "rows", p.Tokens)), cancellationToken);
                    log?.Report(string.Create(CultureInfo.InvariantCulture,
                        $"{name}/{prompt}/{split}: {s.Accepted:N0} rows{(s.AlreadyComplete ? " (already extracted)" : $" in {s.Elapsed.TotalSeconds:F0} s")}"));
                }
                foreach (string feature in spec.Features)
                {
                    cancellationToken.ThrowIfCancellationRequested();
                    steps.Begin($"{name}/{prompt}/{feature}");
                    FeatureRequest request = byFeature[feature];
                    bool zeroShot = feature == "zero-shot";
                    var cellInputs = new JsonObject
                    {
                        ["model"] = modelInputs.DeepClone(),
                        ["template"] = template,
                        ["feature"] = feature,
                        ["request"] = request.Describe(),
                        ["data"] = dataInputs.DeepClone(),
                        ["verbalizer"] = request is WordListFeature ? verbalizerSha : null,
                        ["probe"] = zeroShot ? null : new JsonObject
                        {
                            ["folds"] = spec.Probe.Folds,
                            ["strengths"] = new JsonArray([.. spec.Probe.InverseRegularizations.Select(c => JsonValue.Create(c))]),
                        },
                    };
                    string cellFile = Path.Combine(cells, $"{name}.{prompt}.{feature.Replace(':', '_')}.json");
                    string predictions = PredictionsFile(cells, name, prompt, feature);
                    StudyCell cell = Cached(cellFile, cellInputs,
                        () => zeroShot
                            ? ZeroShot(name, prompt, Path.Combine(runs, "test"), Stem(request, model), verbalizer!, classes, predictions)
                            : Probe(name, prompt, feature, Stem(request, model), Path.Combine(runs, "train"), Path.Combine(runs, "test"), spec.Probe,
                                steps.Relay<ProbeSearchProgress>(p => (p.Done, p.Count, "C values", 0)), predictions),
                        c => WriteCell(c, classes.Classes), ReadCell, out bool kept, () => File.Exists(predictions));
                    results.Add(cell);
                    log?.Report(string.Create(CultureInfo.InvariantCulture,
                        $"{name}/{prompt}/{feature}: accuracy {cell.Score.Accuracy:P1} ({cell.Score.AccuracyLow:P1} – {cell.Score.AccuracyHigh:P1}), log loss {cell.Score.LogLoss:F3}{(cell.InverseRegularization is double c ? $", C = {c:G3}" : "")}{Kept(kept)}"));
                }
                var probing = new Probing(spec, name, prompt, template, modelInputs, dataInputs, classes.Classes, cells, Path.Combine(runs, "train"), Path.Combine(runs, "test"), trainFile, testFile, steps, log);
                if (spec.Layers)
                {
                    layerCells.AddRange(probing.Layers(model.Config.Layers));
                }
                if (spec.Control != null)
                {
                    selectivity.AddRange(probing.Selectivity());
                }
                foreach ((string a, string b) in spec.Compare)
                {
                    PairedComparison paired = Paired(PredictionsFile(cells, name, prompt, a), PredictionsFile(cells, name, prompt, b), cells);
                    comparisons.Add(new StudyComparison(name, prompt, a, b, paired));
                    log?.Report(string.Create(CultureInfo.InvariantCulture,
                        $"{name}/{prompt}: {a} − {b} accuracy {100 * paired.AccuracyDifference:+0.0;-0.0} points ({100 * paired.AccuracyLow:+0.0;-0.0} … {100 * paired.AccuracyHigh:+0.0;-0.0}), {a} better in {paired.AccuracyABetter:P0} of {paired.Samples:N0} resamples"));
                }
            }
        }
        return new StudyResult(spec, classes.Classes, Prior(classes, trainFile, testFile), models, results, Curves(spec, models, results), layerCells, selectivity, comparisons);
    }

    private static string Kept(bool kept) => kept ? " (kept from an earlier run)" : "";

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

    /// <summary>The feature requests of one run (each kind once), and the request each study feature reads.</summary>
    private static (FeatureRequest[] Requests, Dictionary<string, FeatureRequest> ByFeature) Requests(StudySpec spec, LanguageModel model, Verbalizer? verbalizer)
    {
        var requests = new List<FeatureRequest>();
        var byFeature = new Dictionary<string, FeatureRequest>(StringComparer.Ordinal);
        int layers = model.Config.Layers;
        // A layer sweep reads every layer's last-token state.
        foreach (string feature in spec.Layers ? spec.Features.Append(HiddenStateFeature.Name + ":all") : spec.Features)
        {
            if (feature.EndsWith(":all", StringComparison.Ordinal))
            {
                foreach (FeatureRequest layer in FeatureSpec.Parse(feature, layers))
                {
                    if (!requests.Exists(r => r.GetType() == layer.GetType() && r.Spec == layer.Spec))
                    {
                        requests.Add(layer);
                    }
                }
                continue;
            }
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
            byFeature[feature] = same ?? request;
        }
        return ([.. requests], byFeature);
    }

    /// <summary>The run file a study feature reads: its request's primary output.</summary>
    private static string Stem(FeatureRequest request, LanguageModel model) => request.Outputs(ModelShape.Of(model.Config))[request.PrimaryOutput].Name;

    private static StudyCell Probe(string model, string prompt, string feature, string stem,
        string trainRun, string testRun, ProbeOptions options, IProgress<ProbeSearchProgress> progress, string predictions)
    {
        RunFeatures train = RunFeatures.Load(trainRun, stem), test = RunFeatures.Load(testRun, stem);
        LinearProbe probe = LinearProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, options, progress);
        ProbeScore score = ProbeScorer.Score(probe, test, testRun);
        PredictionTable.Write(predictions, test.Ids, test.Labels, probe.Classes, score.Probabilities);
        return new StudyCell(model, prompt, feature, train.Width, train.Rows, probe.InverseRegularization, score.Report);
    }

    /// <summary>A cell's test predictions beside its score: cells/MODEL.PROMPT.FEATURE.predictions.csv.</summary>
    private static string PredictionsFile(string cells, string model, string prompt, string feature) =>
        Path.Combine(cells, $"{model}.{prompt}.{feature.Replace(':', '_')}.predictions.csv");

    /// <summary>The paired bootstrap of two cells' predictions (the same test rows, the same classes: the study's).</summary>
    private static PairedComparison Paired(string a, string b, string cells)
    {
        PredictionTable pa = PredictionTable.Read(a), pb = PredictionTable.Read(b);
        if (!pa.Ids.SequenceEqual(pb.Ids, StringComparer.Ordinal) || !pa.Classes.SequenceEqual(pb.Classes, StringComparer.Ordinal))
        {
            throw new StudyException(cells, $"{Path.GetFileName(a)} and {Path.GetFileName(b)} do not score the same rows and classes; remove them to have them scored again");
        }
        var index = new LabelIndex(pa.Classes);
        return PairedComparison.Compare(pa.Probabilities, pb.Probabilities, index.Indices(pa.Labels), pa.Classes.Count);
    }

    /// <summary>The verbalizer's label distribution (as assay zero-shot reports it), in the probe's class order.</summary>
    private static StudyCell ZeroShot(string model, string prompt, string testRun, string stem, Verbalizer verbalizer, LabelIndex classes, string predictions)
    {
        if (!verbalizer.Labels.Order(StringComparer.Ordinal).SequenceEqual(classes.Classes, StringComparer.Ordinal))
        {
            string missing = classes.Classes.Except(verbalizer.Labels, StringComparer.Ordinal).Concat(verbalizer.Labels.Except(classes.Classes, StringComparer.Ordinal)).First();
            throw new StudyException(testRun, $"the verbalizer's labels and the training labels differ (\"{missing}\" is in one only); zero-shot needs the same labels");
        }
        RunFeatures test = RunFeatures.Load(testRun, stem);
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
        PredictionTable.Write(predictions, test.Ids, test.Labels, classes.Classes, scorer.Probabilities());
        return new StudyCell(model, prompt, "zero-shot", 0, 0, null, scorer.Report());
    }

    /// <summary>
    /// What the folder holds: foreign files, a study made from another study file (without overwrite) and parts without
    /// a study file (without overwrite) are refused; the same study, or the same study file edited since, is continued
    /// (no entries to remove: each part is then kept only if its inputs are unchanged); anything else starts over (the
    /// entries to remove). Nothing is changed here but creating the folder.
    /// </summary>
    private static string[]? Claim(StudySpec spec, string folder, bool overwrite, IProgress<string>? log)
    {
        Directory.CreateDirectory(folder);
        string specPath = Path.Combine(folder, StudyFolder.SpecFile);
        JsonObject current = spec.ToJson();
        string[] entries = [.. Directory.EnumerateFileSystemEntries(folder).Select(e => Path.GetFileName(e)!).Where(e => !FolderLock.IsLockFile(e))];
        if (entries.Any(e => !StudyFolder.Owns(e)))
        {
            throw new StudyException(folder, "holds files that are not part of a study; give an empty or new folder");
        }
        if (File.Exists(specPath) && !overwrite)
        {
            JsonNode? stored = ReadJson(specPath);
            if (JsonNode.DeepEquals(stored, current))
            {
                return null;
            }
            string field = current.Select(p => p.Key).Where(k => k != StudySpec.FileField).FirstOrDefault(k => !JsonNode.DeepEquals(stored?[k], current[k])) ?? "study file";
            string? storedFile = (stored?[StudySpec.FileField] as JsonValue)?.TryGetValue(out string? f) == true ? f : null;
            if (storedFile != spec.Path)
            {
                throw new StudyException(folder, $"holds a study made from another study file ({storedFile ?? "unknown"}) with a different {field.Replace('_', ' ')}; give another folder, or pass --overwrite to start over");
            }
            log?.Report($"{spec.Path} has changed since this folder was made (first in {field.Replace('_', ' ')}): the parts whose inputs did not change are kept, the others computed again");
            return [];
        }
        if (!overwrite && entries.Length > 0)
        {
            throw new StudyException(folder, $"holds parts of a study without its {StudyFolder.SpecFile}; pass --overwrite to start over");
        }
        return entries;
    }

    /// <summary>
    /// The engine that computes this run of the study, written to engine.json; when the folder's parts were computed by
    /// another (or by one that did not record itself), the log says so before anything is computed: every part's
    /// inputs name the engine, so all of them are computed again.
    /// </summary>
    private static JsonObject ClaimEngine(string folder, string version, IProgress<string>? log)
    {
        var engine = new JsonObject { ["version"] = version, ["kernels"] = LanguageModel.Kernels.ToString() };
        string path = Path.Combine(folder, StudyFolder.EngineFile);
        JsonNode? stored = File.Exists(path) ? ReadJson(path) : null;
        bool earlierParts = Directory.Exists(Path.Combine(folder, StudyFolder.CellsFolder)) || Directory.Exists(Path.Combine(folder, StudyFolder.RunsFolder));
        if (earlierParts && !JsonNode.DeepEquals(stored, engine))
        {
            string before = stored is null ? "an engine that did not record itself" : $"engine {stored["version"]} with {stored["kernels"]} kernels";
            log?.Report($"this folder's parts were computed by {before}; this is engine {version} with {engine["kernels"]} kernels: every extraction, cross-entropy and probe is computed again");
        }
        AtomicFile.WriteJson(path, engine);
        return engine;
    }

    /// <summary>
    /// The runs of one model and prompt are kept only if they were extracted from the same inputs (model files, engine,
    /// template, every feature request, data); otherwise both splits go, to be extracted again.
    /// </summary>
    private static void ClaimRuns(string runs, JsonObject inputs)
    {
        string path = Path.Combine(runs, RunInputsFile);
        if (Directory.Exists(runs) && !(File.Exists(path) && JsonNode.DeepEquals(ReadJson(path), inputs)))
        {
            Directory.Delete(runs, recursive: true);
        }
        if (!File.Exists(path))
        {
            Directory.CreateDirectory(runs);
            AtomicFile.WriteText(path, inputs.ToJsonString(Indented) + "\n");
        }
    }

    /// <summary>The inputs of a model's and prompt's runs, beside them: runs/MODEL/PROMPT/inputs.json.</summary>
    private const string RunInputsFile = "inputs.json";

    /// <summary>The key that says what a cached part was computed from.</summary>
    private const string InputsField = "inputs";

    /// <summary>A JSON file the study wrote, or null where it is not JSON (then the part is computed again).</summary>
    private static JsonNode? ReadJson(string path)
    {
        try
        {
            return JsonInput.TryParseNode(InputFile.ReadAllBytes(path), 64, out _);
        }
        catch (JsonException)
        {
            return null;
        }
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
    /// of a label that has them, so cross-validation sees every class; written as JSONL (id, text, label), with its
    /// inputs (the source's path and hash, k and the least count) beside it, so an edited study or task file makes it
    /// again. A bad record stops the study.
    /// </summary>
    private static string Subsample(string source, int every, int least, string target)
    {
        var inputs = new JsonObject { ["source"] = source, ["sha256"] = FileDigest.Sha256(source), ["every"] = every, ["least"] = least };
        string inputsFile = Path.ChangeExtension(target, ".inputs.json");
        if (File.Exists(target) && File.Exists(inputsFile) && JsonNode.DeepEquals(ReadJson(inputsFile), inputs))
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
        AtomicFile.WriteText(inputsFile, inputs.ToJsonString(Indented) + "\n");
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

    /// <summary>A part read back when its file holds the same inputs, else computed and written with them.</summary>
    /// <remarks><paramref name="complete"/>, when given, says whether the files computed beside the part are all there too.</remarks>
    private static T Cached<T>(string path, JsonObject inputs, Func<T> compute, Func<T, JsonObject> write, Func<JsonObject, T> read, out bool kept,
        Func<bool>? complete = null)
    {
        if (File.Exists(path) && ReadJson(path) is JsonObject stored && JsonNode.DeepEquals(stored[InputsField], inputs) && (complete?.Invoke() ?? true))
        {
            kept = true;
            return read(stored);
        }
        T value = compute();
        JsonObject json = write(value);
        json[InputsField] = inputs.DeepClone();
        AtomicFile.WriteText(path, json.ToJsonString(Indented) + "\n");
        kept = false;
        return value;
    }

    /// <summary>Numbers the study's steps and turns each step's own progress into <see cref="StudyProgress"/>.</summary>
    private sealed class StepTracker(IProgress<StudyProgress>? progress, int count)
    {
        private readonly System.Diagnostics.Stopwatch _clock = new();
        private int _index;
        private string _step = "";

        public void Begin(string step)
        {
            _index++;
            _step = step;
            _clock.Restart();
        }

        /// <summary>A synchronous relay (Progress&lt;T&gt; would post to the thread pool, out of order).</summary>
        public IProgress<T> Relay<T>(Func<T, (long Done, long Total, string Unit, long Tokens)> map) => new Relayed<T>(this, map);

        private sealed class Relayed<T>(StepTracker tracker, Func<T, (long Done, long Total, string Unit, long Tokens)> map) : IProgress<T>
        {
            public void Report(T value)
            {
                (long done, long total, string unit, long tokens) = map(value);
                tracker.Report(done, total, unit, tokens);
            }
        }

        private void Report(long done, long total, string unit, long tokens) =>
            progress?.Report(new StudyProgress(_index, count, _step, done, total, unit, tokens, _clock.Elapsed));
    }

    private static JsonObject WriteCrossEntropy(CrossEntropyResult r) => new()
    {
        ["texts"] = r.Texts,
        ["tokens"] = r.Tokens,
        ["bytes"] = r.Bytes,
        ["nats"] = r.Nats,
        ["tokens_run"] = r.TokensRun,
    };

    private static CrossEntropyResult ReadCrossEntropy(JsonObject o) =>
        new(o["texts"]!.GetValue<long>(), o["tokens"]!.GetValue<long>(), o["bytes"]!.GetValue<long>(), o["nats"]!.GetValue<double>(),
            o["tokens_run"]!.GetValue<long>());

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
