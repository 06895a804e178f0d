using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Features;
using Assay.Input;
using Assay.Model;
using Assay.Output;

namespace Assay.Evaluation;

/// <summary>One cell of a study: a feature kind of one model under one prompt, scored on the test texts.</summary>
/// <param name="Model">Model name.</param>
/// <param name="Prompt">Prompt name.</param>
/// <param name="Feature">Feature kind as the study file names it.</param>
/// <param name="Width">Features a row (0 for zero-shot).</param>
/// <param name="TrainRows">Rows the probe was fitted on (0 for zero-shot).</param>
/// <param name="Strength">The C chosen by cross-validation (null for zero-shot).</param>
/// <param name="Score">Test accuracy with its bootstrap interval, log loss, macro-F1 and confusion.</param>
public sealed record StudyCell(string Model, string Prompt, string Feature, int Width, int TrainRows, double? Strength, ProbeReport Score);

/// <summary>A model of a study with its cross-entropy on the study's test texts (no prompt).</summary>
public sealed record StudyModel(string Name, string Folder, CrossEntropyResult CrossEntropy);

/// <summary>Test log loss against the models' cross-entropy for one prompt and feature kind, with the fitted curve.</summary>
public sealed record StudyCurve(string Prompt, string Feature, IReadOnlyList<(double CrossEntropy, double LogLoss)> Points, SquareRootFit Fit);

/// <summary>Everything a study measured.</summary>
/// <param name="Spec">The study.</param>
/// <param name="Classes">The task's labels, ordinal order (the probes' class order).</param>
/// <param name="Prior">The baseline without features: every test text given the training labels' frequencies (its accuracy is the majority class's share).</param>
/// <param name="Models">Each model with its cross-entropy.</param>
/// <param name="Cells">Every model × prompt × feature, in that order.</param>
/// <param name="Curves">Test log loss against cross-entropy for each prompt and probed feature (none with fewer than 3 distinct cross-entropies).</param>
public sealed record StudyResult(StudySpec Spec, IReadOnlyList<string> Classes, ProbeReport Prior, IReadOnlyList<StudyModel> Models, IReadOnlyList<StudyCell> Cells, IReadOnlyList<StudyCurve> Curves);

/// <summary>
/// Runs a study grid into a folder: the subsampled task (data/), one extraction run per model, prompt and split
/// (runs/MODEL/PROMPT/train|test, resumable), and each cell's result (cells/*.json). A rerun with the same study file
/// reuses what is there, so an interrupted study goes on where it stopped; a folder made from another study file is
/// refused unless overwrite is asked for.
/// </summary>
public static class Study
{
    /// <summary>The resolved study file as stored in the folder.</summary>
    public const string SpecFile = "study.json";

    private static readonly JsonSerializerOptions Indented = new() { WriteIndented = true };

    /// <summary>Runs (or continues) the study.</summary>
    /// <exception cref="StudyException">The folder holds another study or foreign files, a task file has a bad record, or a test label is unknown.</exception>
    public static StudyResult Run(StudySpec spec, string outFolder, bool overwrite = false, IProgress<string>? log = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(spec);
        ArgumentNullException.ThrowIfNull(outFolder);
        outFolder = Path.GetFullPath(outFolder);
        Prepare(spec, outFolder, overwrite);
        string data = Directory.CreateDirectory(Path.Combine(outFolder, "data")).FullName;
        string trainFile = Subsample(spec.Train, spec.TrainEvery, spec.Probe.Folds, Path.Combine(data, "train.jsonl"));
        string testFile = Subsample(spec.Test, spec.TestEvery, 1, Path.Combine(data, "test.jsonl"));
        string cells = Directory.CreateDirectory(Path.Combine(outFolder, "cells")).FullName;
        Verbalizer? verbalizer = spec.Verbalizer == null ? null : Verbalizer.Load(spec.Verbalizer);
        string[] testTexts = [.. ReadRecords(testFile).Select(r => r.Text!)];

        var models = new List<StudyModel>();
        var results = new List<StudyCell>();
        string[] classes = [.. ReadRecords(trainFile).Select(r => r.Label).Distinct(StringComparer.Ordinal).Order(StringComparer.Ordinal)];
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
                string runs = Path.Combine(outFolder, "runs", name, prompt);
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
                        WriteCell, ReadCell);
                    results.Add(cell);
                    log?.Report(string.Create(CultureInfo.InvariantCulture,
                        $"{name}/{prompt}/{feature}: accuracy {cell.Score.Accuracy:P1} ({cell.Score.AccuracyLow:P1} – {cell.Score.AccuracyHigh:P1}), log loss {cell.Score.LogLoss:F3}{(cell.Strength is double c ? $", C = {c:G3}" : "")}"));
                }
            }
        }
        return new StudyResult(spec, classes, Prior(classes, trainFile, testFile), models, results, Curves(spec, models, results));
    }

    private static ProbeReport Prior(string[] classes, string trainFile, string testFile)
    {
        var index = classes.Select((c, i) => (c, i)).ToDictionary(x => x.c, x => x.i, StringComparer.Ordinal);
        double[] frequency = new double[classes.Length];
        string[] train = [.. ReadRecords(trainFile).Select(r => r.Label)];
        foreach (string label in train)
        {
            frequency[index[label]] += 1.0 / train.Length;
        }
        int[] truth = [.. ReadRecords(testFile).Select(r => index.TryGetValue(r.Label, out int i) ? i
            : throw new StudyException(testFile, $"test label \"{r.Label}\" has no training rows"))];
        double[] p = new double[truth.Length * classes.Length];
        for (int i = 0; i < truth.Length; i++)
        {
            frequency.CopyTo(p, i * classes.Length);
        }
        return ProbeReport.Score(p, truth, classes.Length);
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
            stems[feature] = (same ?? request).Outputs(model.Config)[0].Name;
        }
        return ([.. requests], stems);
    }

    private static StudyCell Probe(string model, string prompt, string feature, string stem, string trainRun, string testRun, ProbeOptions options)
    {
        RunFeatures train = RunFeatures.Load(trainRun, stem), test = RunFeatures.Load(testRun, stem);
        LinearProbe probe = LinearProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, options);
        var index = probe.Classes.Select((c, i) => (c, i)).ToDictionary(x => x.c, x => x.i, StringComparer.Ordinal);
        string? unknown = test.Labels.FirstOrDefault(l => !index.ContainsKey(l));
        if (unknown != null)
        {
            throw new StudyException(testRun, $"test label \"{unknown}\" has no training rows");
        }
        ProbeReport score = ProbeReport.Score(probe.Predict(test.Values, test.Rows, test.Width), [.. test.Labels.Select(l => index[l])], probe.Classes.Count);
        return new StudyCell(model, prompt, feature, train.Width, train.Rows, probe.Strength, score);
    }

    /// <summary>The verbalizer's label distribution (as assay zero-shot reports it), in the probe's class order.</summary>
    private static StudyCell ZeroShot(string model, string prompt, string testRun, Verbalizer verbalizer, string[] classes)
    {
        if (!verbalizer.Labels.Order(StringComparer.Ordinal).SequenceEqual(classes, StringComparer.Ordinal))
        {
            string missing = classes.Except(verbalizer.Labels, StringComparer.Ordinal).Concat(verbalizer.Labels.Except(classes, StringComparer.Ordinal)).First();
            throw new StudyException(testRun, $"the verbalizer's labels and the training labels differ (\"{missing}\" is in one only); zero-shot needs the same labels");
        }
        RunFeatures test = RunFeatures.Load(testRun, "words.first");
        var index = classes.Select((l, i) => (l, i)).ToDictionary(x => x.l, x => x.i, StringComparer.Ordinal);
        string? unknown = test.Labels.FirstOrDefault(l => !index.ContainsKey(l));
        if (unknown != null)
        {
            throw new StudyException(testRun, $"test label \"{unknown}\" is not in the verbalizer");
        }
        int k = classes.Length;
        int[] position = [.. verbalizer.Labels.Select(l => index[l])];
        double[] p = new double[test.Rows * k];
        double[] scores = new double[k];
        float[] row = new float[test.Width];
        for (int i = 0; i < test.Rows; i++)
        {
            for (int j = 0; j < test.Width; j++)
            {
                row[j] = (float)test.Values[(i * test.Width) + j];
            }
            verbalizer.Distribution(row, logLikelihoods: false, scores);
            for (int j = 0; j < k; j++)
            {
                p[(i * k) + position[j]] = scores[j];
            }
        }
        ProbeReport score = ProbeReport.Score(p, [.. test.Labels.Select(l => index[l])], k);
        return new StudyCell(model, prompt, "zero-shot", 0, 0, null, score);
    }

    private static void Prepare(StudySpec spec, string folder, bool overwrite)
    {
        Directory.CreateDirectory(folder);
        string specPath = Path.Combine(folder, SpecFile);
        JsonObject current = spec.ToJson();
        string[] ours = [SpecFile, "data", "runs", "cells"];
        string[] entries = [.. Directory.EnumerateFileSystemEntries(folder).Select(e => Path.GetFileName(e)!)];
        if (entries.Any(e => !ours.Contains(e) && !IsReport(e)))
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
            return;
        }
        if (!overwrite && entries.Length > 0)
        {
            throw new StudyException(folder, $"holds parts of a study without its {SpecFile}; pass --overwrite to start over");
        }
        // Starting over: the earlier study's parts and reports go, so nothing stale stays beside the new results.
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
        AtomicFile.WriteText(specPath, current.ToJsonString(Indented) + "\n");
    }

    /// <summary>Files a report writer puts beside the study's own (results tables and plots).</summary>
    private static bool IsReport(string name) => name.StartsWith("results", StringComparison.Ordinal) || name.EndsWith(".png", StringComparison.Ordinal);

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

    private static JsonObject WriteCell(StudyCell c)
    {
        int k = c.Score.Confusion.GetLength(0);
        return new JsonObject
        {
            ["model"] = c.Model,
            ["prompt"] = c.Prompt,
            ["feature"] = c.Feature,
            ["width"] = c.Width,
            ["train_rows"] = c.TrainRows,
            ["c"] = c.Strength,
            ["test_rows"] = c.Score.Rows,
            ["accuracy"] = c.Score.Accuracy,
            ["accuracy_95"] = new JsonArray(c.Score.AccuracyLow, c.Score.AccuracyHigh),
            ["log_loss"] = c.Score.LogLoss,
            ["macro_f1"] = c.Score.MacroF1,
            ["confusion"] = new JsonArray([.. Enumerable.Range(0, k).Select(i => new JsonArray([.. Enumerable.Range(0, k).Select(j => JsonValue.Create(c.Score.Confusion[i, j]))]))]),
        };
    }

    private static StudyCell ReadCell(JsonObject o)
    {
        JsonArray rows = o["confusion"]!.AsArray();
        var confusion = new int[rows.Count, rows.Count];
        for (int i = 0; i < rows.Count; i++)
        {
            for (int j = 0; j < rows.Count; j++)
            {
                confusion[i, j] = rows[i]![j]!.GetValue<int>();
            }
        }
        var score = new ProbeReport(o["test_rows"]!.GetValue<int>(), o["accuracy"]!.GetValue<double>(), o["accuracy_95"]![0]!.GetValue<double>(),
            o["accuracy_95"]![1]!.GetValue<double>(), o["log_loss"]!.GetValue<double>(), o["macro_f1"]!.GetValue<double>(), confusion);
        return new StudyCell(o["model"]!.GetValue<string>(), o["prompt"]!.GetValue<string>(), o["feature"]!.GetValue<string>(),
            o["width"]!.GetValue<int>(), o["train_rows"]!.GetValue<int>(), o["c"]?.GetValue<double>(), score);
    }
}
