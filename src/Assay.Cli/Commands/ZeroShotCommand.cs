using System.CommandLine;
using System.Globalization;
using System.Text.Json.Nodes;
using Assay.Evaluation;
using Assay.Features;
using Assay.Input;
using Assay.Model;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay zero-shot &lt;input&gt; --verbalizer FILE --prompt "…"</c>: classifies each labelled text by the label whose words are
/// likeliest after the prompt, with no training, and reports accuracy, log loss, macro-F1 and the confusion matrix.
/// </summary>
internal static class ZeroShotCommand
{
    public static Command Create()
    {
        var input = new Argument<FileInfo>("input") { Description = "Labelled texts: JSONL, CSV or TSV with a label field." };
        var model = ModelOption.Create();
        var verbalizer = new Option<FileInfo>("--verbalizer") { Description = "Label words: one line per label, \"label: word, word\".", Required = true };
        var prompt = new Option<string>("--prompt") { Description = "Template ending where the label word should follow, e.g. \"{text} It is a kind of\".", Required = true };
        var full = new Option<bool>("--words-loglik") { Description = "Score each word by the likelihood of all its tokens, as the words-loglik feature (default: its first token's probability, as words)." };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Folder for report.json and predictions.csv (the probe's report shape)." };
        var overwrite = new Option<bool>("--overwrite") { Description = "Replace an earlier report in the output folder." };
        var shared = new SharedOptions();
        var command = new Command("zero-shot", "Classify labelled texts by the likeliest label words after a prompt (no training) and report accuracy.")
        {
            input, model, verbalizer, prompt, full, output, overwrite,
        };
        shared.AddInput(command, fields: true);
        shared.AddModel(command, prompted: true);
        command.SetAction(r => CommandRunner.Run(() =>
        {
            InputFields fields = shared.Fields(r, labelRequired: true);
            return Run(r.GetValue(model)!.FullName, SharedOptions.InputPath(r.GetValue(input)!), r.GetValue(verbalizer)!.FullName,
                r.GetValue(prompt)!, r.GetValue(full), ExtractCommand.Format(r.GetValue(shared.Format)!), fields.Text, fields.Label, Console.Out,
                r.GetValue(output)?.FullName, r.GetValue(overwrite), shared.Model(r), fields.IdRequired ? fields.Id : null, Console.Error);
        }));
        return command;
    }

    internal static int Run(string folder, string input, string verbalizerPath, string prompt, bool fullWords, InputFormat format,
        string textField, string labelField, TextWriter o, string? outFolder = null, bool overwrite = false,
        ModelRun? run = null, string? idField = null, TextWriter? err = null)
    {
        PromptTemplate template = ExtractCommand.Prompt(prompt);
        if (outFolder != null)
        {
            // Refused before any text is scored, like a probe's output folder.
            ReportFolder.CheckClaimable(outFolder, overwrite);
        }
        run ??= new ModelRun();
        _ = run.Validate();
        Verbalizer v = Verbalizer.Load(verbalizerPath);
        ExtractionOptions options = run.Extraction(template, [new WordListFeature(v.AllWords, fullWords)]);
        LanguageModel m = run.Open(folder, err ?? TextWriter.Null);
        var extractor = new FeatureExtractor(m, options);
        int output = fullWords ? 1 : 0;
        var classes = new LabelIndex(v.Labels);
        using TextInputReader reader = TextInputReader.Open(input, format, new InputFields { Text = textField, Label = labelField, LabelRequired = true, Id = idField ?? "id", IdRequired = idField != null });
        var truth = new List<int>();
        var texts = new List<string>();
        var ids = new List<string>();
        var labels = new List<string>();
        long skipped = 0, unlabelled = 0, unknown = 0;
        string? firstUnknown = null;
        foreach (InputRecord r in reader.Records())
        {
            if (r.Accepted && classes.TryGetIndex(r.Label, out int label))
            {
                truth.Add(label);
                texts.Add(r.Text!);
                ids.Add(r.Id);
                labels.Add(r.Label);
            }
            else
            {
                skipped++;
                if (r.Accepted && r.Label.Length > 0)
                {
                    unknown++;
                    firstUnknown ??= r.Label;
                }
                else
                {
                    unlabelled++;
                }
            }
        }
        if (truth.Count == 0)
        {
            // Nothing to score is a mistake (no labels, the wrong label field, another task's verbalizer), not a 0 % result.
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture,
                $"{input}: no record has a label the verbalizer knows ({skipped:N0} read: {unlabelled:N0} without a label (no \"{labelField}\" field, or plain lines); {unknown:N0} with other labels{(firstUnknown != null ? $", such as \"{firstUnknown}\"" : "")}); zero-shot scores labelled texts"));
        }
        int k = classes.Count;
        var scorer = new ZeroShotScorer(v, classes, fullWords);
        var printer = TextProgressPrinter.ForConsole(err ?? TextWriter.Null, texts.Count);
        foreach (FeatureRow f in extractor.Extract(texts, printer))
        {
            scorer.Add(f.Values(output), truth[scorer.Rows]);
        }
        printer.End();
        ClassificationReport score = scorer.Report();
        string majority = labels.GroupBy(l => l, StringComparer.Ordinal).OrderByDescending(g => g.Count()).ThenBy(g => g.Key, StringComparer.Ordinal).First().Key;
        double majorityShare = labels.Count(l => l == majority) / (double)labels.Count;
        if (outFolder != null)
        {
            using Assay.Output.FolderLock folderLock = ReportFolder.Claim(outFolder, overwrite);
            PredictionTable.Write(Path.Combine(outFolder, ReportFolder.PredictionsFile), ids, labels, classes.Classes, scorer.Probabilities());
            var test = new JsonObject { ["input"] = input };
            foreach ((string key, JsonNode? value) in score.ToJson(classes.Classes))
            {
                test[key] = value?.DeepClone();
            }
            Predictions.WriteJson(Path.Combine(outFolder, ReportFolder.ReportFile), new JsonObject
            {
                ["feature"] = fullWords ? "words-loglik" : "words",
                ["verbalizer"] = verbalizerPath,
                ["prompt"] = prompt,
                ["test"] = test,
                ["chance_baseline"] = 1.0 / classes.Count,
                // No training set here: the most frequent label of the scored texts themselves (a constant predictor's best).
                ["majority_baseline"] = new JsonObject { ["class"] = majority, ["accuracy"] = majorityShare },
            });
        }
        CultureInfo inv = CultureInfo.InvariantCulture;
        o.WriteLine(string.Create(inv, $"{score.Rows:N0} texts ({skipped:N0} records skipped: rejected, or a label the verbalizer lacks), {k} labels, scored by {(fullWords ? "the likelihood of whole words" : "first-token probability")}"));
        o.WriteLine(string.Create(inv, $"accuracy {score.Accuracy:P2} (95 % bootstrap {score.AccuracyLow:P2} – {score.AccuracyHigh:P2}), log loss {score.LogLoss:F4}, macro-F1 {score.MacroF1:F4}; chance {1.0 / k:P2}, majority {majorityShare:P2} (\"{majority}\")"));
        o.WriteLine("confusion (rows: true label, columns: predicted)");
        o.WriteLine(string.Join(' ', v.Labels));
        for (int i = 0; i < k; i++)
        {
            o.WriteLine(string.Join(' ', Enumerable.Range(0, k).Select(j => score.Confusion[i, j].ToString(inv))));
        }
        return 0;
    }
}
