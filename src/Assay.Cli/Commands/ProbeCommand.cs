using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Evaluation;
using Assay.Output;
using CsvHelper;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay probe --train RUN --feature F [--test RUN] --out DIR</c>: fits a linear probe on one feature of a run
/// folder (C chosen by cross-validation) and scores it on a test run; <c>--probe DIR/probe.json</c> applies a saved
/// probe instead of fitting one.
/// </summary>
internal static class ProbeCommand
{
    public static Command Create()
    {
        var train = new Option<DirectoryInfo>("--train") { Description = "Run folder to fit the probe on (its rows.csv labels are the classes)." };
        var saved = new Option<FileInfo>("--probe") { Description = "A probe.json written by an earlier fit, to apply instead of fitting." };
        var test = new Option<DirectoryInfo>("--test") { Description = "Run folder to score the probe on." };
        var feature = new Option<string>("--feature") { Description = "The feature, as --features names it (hidden:4, hidden:mean, cmean, topk:5) or by its file stem (hidden.layer4.last).", Required = true };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Folder for probe.json, report.json and predictions.csv.", Required = true };
        var folds = new Option<int>("--folds") { Description = "Cross-validation folds.", DefaultValueFactory = _ => new ProbeOptions().Folds };
        var strengths = new Option<string>("--strengths") { Description = "Comma-separated C values to try (larger = weaker L2 penalty).", DefaultValueFactory = _ => string.Join(',', new ProbeOptions().InverseRegularizations.Select(c => c.ToString("R", CultureInfo.InvariantCulture))) };
        var allow = new Option<bool>("--allow-different-runs") { Description = "Compare runs extracted differently (another checkpoint, prompt or storage) on purpose; the report records the difference." };
        var overwrite = new Option<bool>("--overwrite") { Description = "Replace an earlier report in the output folder." };
        var mlp = new Option<int>("--mlp") { Description = "Fit the MLP probe instead: one hidden layer of this many tanh units, the same C search (alpha = 1/C). It is scored and reported, not saved." };
        var control = new Option<string>("--control") { Description = $"Also fit the probe on a control task, labels a fixed random function of each row's type, and report selectivity = task − control accuracy. The type: {ControlTask.KeySpellings}." };
        var trainInput = new Option<FileInfo>("--train-input") { Description = "The training run's input file (checked by its SHA-256), for a --control key that reads the text or a field." };
        var testInput = new Option<FileInfo>("--test-input") { Description = "The test run's input file, likewise." };
        var controlSeed = new Option<ulong>("--control-seed") { Description = "Seed of the control labels.", DefaultValueFactory = _ => 1 };
        var layers = new Option<string>("--layers") { Description = "Sweep layers: fit and score one probe per layer of a run extracted with hidden:all (all, or indices such as 0,2,-1), in the pooling --feature names; writes layers.csv, layers.png and each layer's predictions." };
        var online = new Option<bool>("--online-code") { Description = "Also measure the online codelength of the training labels (MDL probing at the published block fractions), with the chosen C." };
        var command = new Command("probe", "Fit a linear probe (standardized multinomial logistic regression, C by cross-validation) on run-folder features, or apply a saved one, and report accuracy, log loss, macro-F1 and the confusion matrix; optionally an MLP probe, a control task's selectivity and the online codelength.")
        {
            train, saved, test, feature, output, folds, strengths, allow, overwrite, mlp, control, trainInput, testInput, controlSeed, online, layers,
        };
        command.SetAction(r => CommandRunner.Run(() => Run(
            r.GetValue(train)?.FullName, r.GetValue(saved)?.FullName, r.GetValue(test)?.FullName, r.GetValue(feature)!,
            r.GetValue(output)!.FullName, r.GetValue(folds), r.GetValue(strengths)!, Console.Out, r.GetValue(allow), r.GetValue(overwrite), Console.Error,
            new ProbeMethods(r.GetValue(mlp), r.GetValue(control), r.GetValue(trainInput)?.FullName, r.GetValue(testInput)?.FullName, r.GetValue(controlSeed), r.GetValue(online), r.GetValue(layers)))));
        return command;
    }

    internal static int Run(string? trainRun, string? savedProbe, string? testRun, string feature, string output, int folds, string strengths, TextWriter o,
        bool allowDifferentRuns = false, bool overwrite = false, TextWriter? err = null, ProbeMethods? methods = null)
    {
        methods ??= new ProbeMethods();
        if ((trainRun == null) == (savedProbe == null))
        {
            throw new ArgumentException("give --train RUN to fit a probe, or --probe FILE to apply a saved one");
        }
        if (savedProbe != null && testRun == null)
        {
            throw new ArgumentException("--probe needs --test RUN to apply it to");
        }
        double[] grid = [.. strengths.Split(',', StringSplitOptions.TrimEntries | StringSplitOptions.RemoveEmptyEntries).Select(s =>
            double.TryParse(s, NumberStyles.Float, CultureInfo.InvariantCulture, out double c) && c > 0 && double.IsFinite(c) ? c
                : throw new ArgumentException($"--strengths: \"{s}\" is not a positive number"))];
        if (grid.Length == 0)
        {
            throw new ArgumentException("--strengths: no values of C to try; give at least one");
        }
        if (folds < 2)
        {
            throw new ArgumentException($"--folds {folds}: cross-validation needs at least 2 folds");
        }
        var fitOptions = new ProbeOptions { Folds = folds, InverseRegularizations = grid };
        ProbeKind kind = methods.MlpUnits switch
        {
            0 => ProbeKind.Linear,
            > 0 => ProbeKind.Mlp(methods.MlpUnits),
            _ => throw new ArgumentException($"--mlp {methods.MlpUnits}: expected a positive number of hidden units"),
        };
        if (savedProbe != null && (methods.MlpUnits > 0 || methods.ControlKey != null || methods.OnlineCode))
        {
            throw new ArgumentException("--mlp, --control and --online-code fit probes: give --train RUN, not --probe");
        }
        if (methods.ControlKey != null && testRun == null)
        {
            throw new ArgumentException("--control scores the control task on test rows: give --test RUN too");
        }
        if (methods.Layers != null && (trainRun == null || testRun == null))
        {
            throw new ArgumentException("--layers fits and scores a probe per layer: give --train RUN and --test RUN");
        }
        if (methods.Layers != null && methods.OnlineCode)
        {
            throw new ArgumentException("--online-code measures one feature; give it without --layers, once per layer of interest");
        }
        if (methods.ControlKey == null && (methods.TrainInput != null || methods.TestInput != null))
        {
            throw new ArgumentException("--train-input and --test-input are read for --control; give --control KEY");
        }
        CultureInfo inv = CultureInfo.InvariantCulture;
        err ??= TextWriter.Null;

        // Everything is checked before the output folder is touched.
        RunRecord? trainRecord = trainRun == null ? null : RunRecord.Read(trainRun);
        RunRecord? testRecord = testRun == null ? null : RunRecord.Read(testRun);
        string stem = RunFeatures.Resolve(trainRun ?? testRun!, feature);
        string? difference = null;
        if (trainRecord != null && testRecord != null)
        {
            difference = trainRecord.FirstValueDifference(testRecord);
            if (difference != null && !allowDifferentRuns)
            {
                throw new ArgumentException($"--train {trainRun} and --test {testRun} were extracted differently ({difference}); a probe fitted on one does not measure the other. Pass --allow-different-runs to compare them on purpose");
            }
        }
        SavedProbe? saved = savedProbe == null ? null : SavedProbe.Load(savedProbe);
        if (saved != null)
        {
            // The width from the record: the features themselves are read once, below.
            int width = testRecord!.Files.First(f => f.File == stem + ".npy").Width;
            difference = saved.Mismatch(stem, width, testRecord);
            bool runsOnly = difference != null && difference.StartsWith("the probe's training run", StringComparison.Ordinal);
            if (difference != null && !(runsOnly && allowDifferentRuns))
            {
                throw new ArgumentException($"--probe {savedProbe} on --test {testRun}: {difference}{(runsOnly ? "; pass --allow-different-runs to apply it on purpose" : "")}");
            }
        }
        if (difference != null)
        {
            err.WriteLine($"assay: comparing different runs on purpose: {difference}");
        }
        (string[] Train, string[] Test)? types = methods.ControlKey == null ? null
            : (ControlTask.Types(trainRun!, methods.ControlKey, methods.TrainInput), ControlTask.Types(testRun!, methods.ControlKey, methods.TestInput));
        if (methods.Layers != null)
        {
            IReadOnlyList<(int Layer, string Stem)> stems = LayerSweep.Stems(trainRun!, stem, methods.Layers);
            foreach ((_, string layerStem) in stems)
            {
                RunFeatures.Resolve(testRun!, layerStem);
            }
            using Assay.Output.FolderLock sweepLock = ReportFolder.Claim(output, overwrite);
            return ProbeSweepReport.Run(trainRun!, testRun!, stem, stems, kind, fitOptions, types, methods, difference, output, o, err);
        }
        using Assay.Output.FolderLock folderLock = ReportFolder.Claim(output, overwrite);

        LinearProbe? probe = null;
        MlpProbe? mlpProbe = null;
        var report = new JsonObject { ["feature"] = stem, ["probe_kind"] = kind.ToString() };
        if (difference != null)
        {
            report["different_runs"] = difference;
        }
        string[]? trainLabels = null;
        RunFeatures? trainData = null;
        IReadOnlyList<string> classes;
        double chosenC;
        if (trainRun != null)
        {
            trainData = RunFeatures.Load(trainRun, stem);
            var search = SearchProgressPrinter.ForConsole(err);
            IReadOnlyList<(double C, double LogLoss, double Accuracy)> tried;
            if (kind.HiddenUnits == 0)
            {
                probe = LinearProbe.Fit(trainData.Values, trainData.Rows, trainData.Width, trainData.Labels, fitOptions, search);
                SavedProbe.Create(probe, stem, trainData.Width, trainRecord!).Save(Path.Combine(output, ReportFolder.ProbeFile));
                (classes, chosenC, tried) = (probe.Classes, probe.InverseRegularization, probe.Search);
            }
            else
            {
                mlpProbe = MlpProbe.Fit(trainData.Values, trainData.Rows, trainData.Width, trainData.Labels, fitOptions, kind.HiddenUnits, progress: search);
                (classes, chosenC, tried) = (mlpProbe.Classes, mlpProbe.InverseRegularization, mlpProbe.Search);
                report["unconverged_fits"] = mlpProbe.Unconverged;
            }
            search.End();
            trainLabels = [.. trainData.Labels];
            report["train"] = new JsonObject { ["run"] = trainRun, ["rows"] = trainData.Rows, ["width"] = trainData.Width };
            string what = kind.HiddenUnits == 0 ? "a linear probe" : $"an MLP probe ({kind.HiddenUnits} tanh units; not saved)";
            o.WriteLine(string.Create(inv, $"fitted {what} on {trainData.Rows:N0} rows × {trainData.Width} features of {stem}, {classes.Count} classes; C = {chosenC:G4} by {folds}-fold cross-validation"));
            o.WriteLine("         C   cv log loss   cv accuracy");
            foreach ((double c, double loss, double accuracy) in tried)
            {
                o.WriteLine(string.Create(inv, $"{c,10:G4}  {loss,12:F4}  {accuracy,12:P2}"));
            }
            if (mlpProbe is { Unconverged: > 0 })
            {
                err.WriteLine($"assay: {mlpProbe.Unconverged} MLP fit(s) stopped at the iteration limit before converging; their parameters are the best point met");
            }
        }
        else
        {
            probe = saved!.Probe;
            chosenC = probe.InverseRegularization;
            report["probe"] = savedProbe;
        }
        report["c"] = chosenC;

        if (testRun != null)
        {
            RunFeatures data = RunFeatures.Load(testRun, stem);
            ProbeScore scored = mlpProbe != null ? ProbeScorer.Score(mlpProbe, data, testRun) : ProbeScorer.Score(probe!, data, testRun);
            ClassificationReport score = scored.Report;
            IReadOnlyList<string> probeClasses = mlpProbe?.Classes ?? probe!.Classes;
            PredictionTable.Write(Path.Combine(output, ReportFolder.PredictionsFile), data.Ids, data.Labels, probeClasses, scored.Probabilities);
            var tested = new JsonObject { ["run"] = testRun };
            foreach ((string key, JsonNode? value) in score.ToJson(probeClasses))
            {
                tested[key] = value?.DeepClone();
            }
            report["test"] = tested;
            o.WriteLine(string.Create(inv,
                $"test: {score.Rows:N0} rows, accuracy {score.Accuracy:P2} (95 % bootstrap {score.AccuracyLow:P2} – {score.AccuracyHigh:P2}), log loss {score.LogLoss:F4}, macro-F1 {score.MacroF1:F4}"));
            if (trainLabels != null)
            {
                // The baseline without features: always the training set's most frequent class.
                string majority = trainLabels.GroupBy(l => l, StringComparer.Ordinal).OrderByDescending(g => g.Count()).ThenBy(g => g.Key, StringComparer.Ordinal).First().Key;
                double accuracy = data.Labels.Count(l => l == majority) / (double)data.Rows;
                report["majority_baseline"] = new JsonObject { ["class"] = majority, ["accuracy"] = accuracy };
                o.WriteLine(string.Create(inv, $"majority baseline: {accuracy:P2} (always \"{majority}\", the training set's most frequent class)"));
            }
            if (types is { } t)
            {
                err.WriteLine($"assay: fitting the control task (type = {methods.ControlKey})");
                var controlSearch = SearchProgressPrinter.ForConsole(err);
                ControlFit control = ControlTask.FitControl(trainData!, t.Train, data, t.Test, kind, fitOptions, methods.ControlSeed, controlSearch);
                controlSearch.End();
                double selectivity = score.Accuracy - control.Report.Accuracy;
                report["control"] = control.ToJson(methods.ControlKey!, methods.ControlSeed, score.Accuracy);
                o.WriteLine(string.Create(inv,
                    $"control task (type = {methods.ControlKey}: {control.Types:N0} types in training, {control.UnseenTestRows:N0} test rows of unseen types): accuracy {control.Report.Accuracy:P2} (95 % bootstrap {control.Report.AccuracyLow:P2} – {control.Report.AccuracyHigh:P2}); always its most frequent label scores {control.MajorityAccuracy:P2}, a lookup table of the training types {control.LookupAccuracy:P2}"));
                o.WriteLine(string.Create(inv, $"selectivity: {100 * selectivity:F2} points (task {score.Accuracy:P2} − control {control.Report.Accuracy:P2})"));
            }
        }
        if (methods.OnlineCode)
        {
            err.WriteLine("assay: measuring the online code");
            OnlineCodeResult code = OnlineCode.Measure(trainData!.Values, trainData.Rows, trainData.Width, trainData.Labels, kind, chosenC, fitOptions.Seed);
            report["online_code"] = code.ToJson();
            o.WriteLine(string.Create(inv,
                $"online code: {code.CodelengthBits / 1000:F2} kbits for {code.Rows:N0} training labels (uniform code {code.UniformBits / 1000:F2} kbits): compression {code.Compression:F2}"));
        }
        Predictions.WriteJson(Path.Combine(output, ReportFolder.ReportFile), report);
        return 0;
    }

}

/// <summary>What <c>assay probe</c> fits besides the task probe: the MLP instead of the linear probe, a control task, the online code.</summary>
/// <param name="MlpUnits">0: the linear probe; otherwise the MLP probe's hidden units.</param>
/// <param name="ControlKey">The control task's type key, or null for none.</param>
/// <param name="TrainInput">The training run's input, for a key that reads it.</param>
/// <param name="TestInput">The test run's input, likewise.</param>
/// <param name="ControlSeed">Seed of the control labels.</param>
/// <param name="OnlineCode">Measure the online codelength.</param>
/// <param name="Layers">Sweep these layers ("all" or indices), or null for the one feature.</param>
internal sealed record ProbeMethods(int MlpUnits = 0, string? ControlKey = null, string? TrainInput = null, string? TestInput = null, ulong ControlSeed = 1,
    bool OnlineCode = false, string? Layers = null);
