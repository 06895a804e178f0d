using System.Globalization;
using System.Text.Json.Nodes;
using Assay.Features;
using Assay.Output;

namespace Assay.Evaluation;

public static partial class Study
{
    /// <summary>
    /// The probing methods of one model and prompt, each part cached like a cell: a probe per layer, and the control
    /// task's selectivity of the linear (and MLP) probe on the last layer.
    /// </summary>
    private sealed class Probing(StudySpec spec, string model, string prompt, string template, JsonObject modelInputs, JsonObject dataInputs,
        IReadOnlyList<string> classes, string cells, string trainRun, string testRun, string trainFile, string testFile, StepTracker steps, IProgress<string>? log)
    {
        /// <summary>Seed of the control labels (the default of assay probe, so a study's control task is the command's).</summary>
        private const ulong ControlSeed = 1;

        private JsonObject Inputs(string part) => new()
        {
            ["model"] = modelInputs.DeepClone(),
            ["template"] = template,
            ["part"] = part,
            ["data"] = dataInputs.DeepClone(),
            ["probe"] = new JsonObject
            {
                ["folds"] = spec.Probe.Folds,
                ["strengths"] = new JsonArray([.. spec.Probe.InverseRegularizations.Select(c => JsonValue.Create(c))]),
            },
        };

        /// <summary>A probe on the last token's hidden state of every layer 0 … <paramref name="layers"/>.</summary>
        public IEnumerable<StudyCell> Layers(int layers)
        {
            for (int k = 0; k <= layers; k++)
            {
                string feature = string.Create(CultureInfo.InvariantCulture, $"layer:{k}");
                string stem = string.Create(CultureInfo.InvariantCulture, $"hidden.layer{k}.last");
                steps.Begin($"{model}/{prompt}/{feature}");
                string predictions = PredictionsFile(cells, model, prompt, feature);
                StudyCell cell = Cached(Path.Combine(cells, $"{model}.{prompt}.layer{k}.json"), Inputs(feature),
                    () => Probe(model, prompt, feature, stem, trainRun, testRun, spec.Probe, steps.Relay<ProbeSearchProgress>(p => (p.Done, p.Count, "C values", 0)), predictions),
                    c => WriteCell(c, classes), ReadCell, out bool kept, () => File.Exists(predictions));
                log?.Report(string.Create(CultureInfo.InvariantCulture,
                    $"{model}/{prompt}/{feature}: accuracy {cell.Score.Accuracy:P1} ({cell.Score.AccuracyLow:P1} – {cell.Score.AccuracyHigh:P1}){Kept(kept)}"));
                yield return cell;
            }
        }

        /// <summary>The control task's selectivity of the linear probe and, with mlp, the MLP probe, on the hidden feature.</summary>
        public IEnumerable<StudySelectivity> Selectivity()
        {
            string key = spec.Control!;
            ProbeKind[] kinds = spec.Mlp > 0 ? [ProbeKind.Linear, ProbeKind.Mlp(spec.Mlp)] : [ProbeKind.Linear];
            string stem = RunFeatures.Resolve(trainRun, HiddenStateFeature.Name);
            foreach (ProbeKind kind in kinds)
            {
                string part = $"selectivity:{kind}";
                steps.Begin($"{model}/{prompt}/{part}");
                JsonObject inputs = Inputs(part);
                inputs["control"] = new JsonObject { ["key"] = key, ["seed"] = ControlSeed };
                SelectivityResult result = Cached(Path.Combine(cells, $"{model}.{prompt}.selectivity.{kind.ToString().Replace(':', '_')}.json"), inputs,
                    () =>
                    {
                        RunFeatures train = RunFeatures.Load(trainRun, stem), test = RunFeatures.Load(testRun, stem);
                        return ControlTask.Measure(train, ControlTask.Types(trainRun, key, trainFile), test, ControlTask.Types(testRun, key, testFile), kind,
                            spec.Probe, ControlSeed, steps.Relay<ProbeSearchProgress>(p => (p.Done, p.Count, "C values", 0)));
                    },
                    WriteSelectivity, ReadSelectivity, out bool kept);
                log?.Report(string.Create(CultureInfo.InvariantCulture,
                    $"{model}/{prompt}/{part}: task {result.Task.Accuracy:P1}, control ({key}) {result.Control.Report.Accuracy:P1} (floor {result.Control.MajorityAccuracy:P1}, ceiling {result.Control.LookupAccuracy:P1}), selectivity {100 * result.Selectivity:F1} points{Kept(kept)}"));
                yield return new StudySelectivity(model, prompt, result);
            }
        }

        private static JsonObject WriteSelectivity(SelectivityResult r) => new()
        {
            ["probe"] = r.Kind.ToString(),
            ["hidden_units"] = r.Kind.HiddenUnits,
            ["task"] = Report(r.Task),
            ["control"] = Report(r.Control.Report),
            ["training_types"] = r.Control.Types,
            ["unseen_test_rows"] = r.Control.UnseenTestRows,
            ["lookup_accuracy"] = r.Control.LookupAccuracy,
            ["majority_accuracy"] = r.Control.MajorityAccuracy,
            ["selectivity"] = r.Selectivity,
        };

        /// <summary>A report whose classes are named by index (the control task's classes are the labels it drew).</summary>
        private static JsonObject Report(ClassificationReport r) =>
            r.ToJson([.. Enumerable.Range(0, r.Confusion.GetLength(0)).Select(i => i.ToString(CultureInfo.InvariantCulture))]);

        private static SelectivityResult ReadSelectivity(JsonObject o) =>
            new(new ProbeKind(o["hidden_units"]!.GetValue<int>()), ClassificationReport.FromJson(o["task"]!.AsObject()),
                new ControlFit(ClassificationReport.FromJson(o["control"]!.AsObject()), o["training_types"]!.GetValue<int>(), o["unseen_test_rows"]!.GetValue<int>(),
                    o["lookup_accuracy"]!.GetValue<double>(), o["majority_accuracy"]!.GetValue<double>()));
    }
}
