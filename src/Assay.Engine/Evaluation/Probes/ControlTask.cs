using System.Buffers.Binary;
using System.Globalization;
using System.Security.Cryptography;
using System.Text;
using Assay.Input;
using Assay.Output;

namespace Assay.Evaluation;

/// <summary>The probe a selectivity measurement fits: the linear probe, or the MLP probe with its hidden width.</summary>
/// <param name="HiddenUnits">0: the linear probe; otherwise the MLP probe's hidden layer width.</param>
public readonly record struct ProbeKind(int HiddenUnits)
{
    /// <summary>The linear probe.</summary>
    public static ProbeKind Linear => new(0);

    /// <summary>The MLP probe of this width.</summary>
    public static ProbeKind Mlp(int hiddenUnits = MlpProbe.DefaultHiddenUnits) =>
        hiddenUnits >= 1 ? new(hiddenUnits) : throw new ArgumentOutOfRangeException(nameof(hiddenUnits), hiddenUnits, "an MLP needs at least one hidden unit");

    /// <summary>"linear" or "mlp:H".</summary>
    public override string ToString() => HiddenUnits == 0 ? "linear" : string.Create(CultureInfo.InvariantCulture, $"mlp:{HiddenUnits}");

    /// <summary>Fits the probe and returns its class names and the class probabilities of the test rows.</summary>
    internal (IReadOnlyList<string> Classes, double[] Probabilities) FitAndPredict(double[] x, int n, int d, IReadOnlyList<string> labels,
        double[] test, int testRows, ProbeOptions options, bool allowSmallClasses, IProgress<ProbeSearchProgress>? progress)
    {
        if (HiddenUnits == 0)
        {
            LinearProbe linear = LinearProbe.Fit(x, n, d, labels, options, progress, allowSmallClasses);
            return (linear.Classes, linear.Predict(test, testRows, d));
        }
        MlpProbe mlp = MlpProbe.Fit(x, n, d, labels, options, HiddenUnits, 500, progress, allowSmallClasses);
        return (mlp.Classes, mlp.Predict(test, testRows, d));
    }
}

/// <summary>What a control task measures: the probe on the task, the same probe on the control labels, and their difference.</summary>
/// <param name="Kind">The probe.</param>
/// <param name="Task">Its test score on the task's labels.</param>
/// <param name="Control">The same probe on the control task.</param>
public sealed record SelectivityResult(ProbeKind Kind, ClassificationReport Task, ControlFit Control)
{
    /// <summary>Task accuracy − control accuracy.</summary>
    public double Selectivity => Task.Accuracy - Control.Report.Accuracy;
}

/// <summary>A probe fitted on a control task and scored on the test rows' control labels.</summary>
/// <param name="Report">Its test score on the control labels.</param>
/// <param name="Types">Distinct types among the training rows.</param>
/// <param name="UnseenTestRows">Test rows whose type no training row has (their control label cannot be learned).</param>
/// <param name="LookupAccuracy">
/// The control task's ceiling for a probe that memorizes types: the test accuracy of a table of each training type's
/// control label, with the most frequent training control label for unseen types. Read the control accuracy against
/// it: a skewed type distribution (one first word on a third of the rows) makes the control task easy to memorize.
/// </param>
/// <param name="MajorityAccuracy">The control task's floor: the test accuracy of always the most frequent training control label.</param>
public sealed record ControlFit(ClassificationReport Report, int Types, int UnseenTestRows, double LookupAccuracy, double MajorityAccuracy)
{
    /// <summary>The control task as reports write it: the key and seed, the types, the scores, the floor, the ceiling and the selectivity against <paramref name="taskAccuracy"/>.</summary>
    public System.Text.Json.Nodes.JsonObject ToJson(string key, ulong seed, double taskAccuracy) => new()
    {
        ["key"] = key,
        ["seed"] = seed,
        ["training_types"] = Types,
        ["unseen_test_rows"] = UnseenTestRows,
        ["accuracy"] = Report.Accuracy,
        ["accuracy_95"] = new System.Text.Json.Nodes.JsonArray(Report.AccuracyLow, Report.AccuracyHigh),
        ["log_loss"] = Report.LogLoss,
        ["lookup_accuracy"] = LookupAccuracy,
        ["majority_accuracy"] = MajorityAccuracy,
        ["selectivity"] = taskAccuracy - Report.Accuracy,
    };
}

/// <summary>
/// Control tasks in the sense of Hewitt and Liang (2019): every input type (a key of each row, such as its first word)
/// gets a fixed label drawn from the task's label distribution, so a probe can score on the control task only by
/// memorizing types, never from what the representation says about the task. Selectivity is task accuracy minus
/// control accuracy: high when the representation, not the probe's capacity, carries the task.
/// The draw is a fixed function of the type and the seed: u = (the first 8 bytes of SHA-256(seed as 8 little-endian
/// bytes ‖ the type's UTF-8 bytes), read little-endian, shifted right by 11) · 2⁻⁵³, and the label is the first class
/// (ordinal order) whose cumulative share of the training labels exceeds u.
/// </summary>
public static class ControlTask
{
    /// <summary>The type keys: "first-word", "last-word", "id" and "field:NAME".</summary>
    public const string KeySpellings = "first-word, last-word, id or field:NAME";

    /// <summary>The control label of each type, drawn from the distribution of <paramref name="taskLabels"/>.</summary>
    /// <exception cref="ArgumentException">No task labels.</exception>
    public static string[] Labels(IReadOnlyList<string> types, IReadOnlyList<string> taskLabels, ulong seed = 1)
    {
        ArgumentNullException.ThrowIfNull(types);
        ArgumentNullException.ThrowIfNull(taskLabels);
        if (taskLabels.Count == 0)
        {
            throw new ArgumentException("no task labels to take the control labels' distribution from");
        }
        string[] classes = [.. taskLabels.Distinct(StringComparer.Ordinal).Order(StringComparer.Ordinal)];
        double[] cumulative = new double[classes.Length];
        double sum = 0;
        for (int j = 0; j < classes.Length; j++)
        {
            sum += taskLabels.Count(l => l == classes[j]);
            cumulative[j] = sum / taskLabels.Count;
        }
        var cache = new Dictionary<string, string>(StringComparer.Ordinal);
        string[] labels = new string[types.Count];
        byte[] prefix = new byte[8];
        BinaryPrimitives.WriteUInt64LittleEndian(prefix, seed);
        for (int i = 0; i < types.Count; i++)
        {
            string type = types[i] ?? throw new ArgumentException($"type {i} is null");
            if (!cache.TryGetValue(type, out string? label))
            {
                byte[] hash = SHA256.HashData([.. prefix, .. Encoding.UTF8.GetBytes(type)]);
                double u = (BinaryPrimitives.ReadUInt64LittleEndian(hash) >> 11) * (1.0 / (1UL << 53));
                int j = 0;
                while (j < classes.Length - 1 && cumulative[j] <= u)
                {
                    j++;
                }
                label = classes[j];
                cache[type] = label;
            }
            labels[i] = label;
        }
        return labels;
    }

    /// <summary>The type of a text under a word key: its first or last whitespace-separated word, lower-cased, without the punctuation around it.</summary>
    public static string WordType(string text, bool last)
    {
        ArgumentNullException.ThrowIfNull(text);
        string[] words = text.Split((char[]?)null, StringSplitOptions.RemoveEmptyEntries);
        if (words.Length == 0)
        {
            return "";
        }
        string word = last ? words[^1] : words[0];
        string trimmed = word.Trim([.. word.Where(char.IsPunctuation).Distinct()]);
        return (trimmed.Length > 0 ? trimmed : word).ToLowerInvariant();
    }

    /// <summary>
    /// The type of every row of a finished run, in rows.csv order, under <paramref name="key"/>: "id" reads rows.csv;
    /// the others read <paramref name="inputPath"/>, which must be the run's input (its SHA-256 is checked against
    /// record.json), with the run's own format and fields.
    /// </summary>
    /// <exception cref="ArgumentException">An unknown key, or a key that needs the input without one.</exception>
    /// <exception cref="RunFolderException">The file is not the run's input, or a row of the run is not in it.</exception>
    public static string[] Types(string runFolder, string key, string? inputPath)
    {
        ArgumentNullException.ThrowIfNull(runFolder);
        ArgumentNullException.ThrowIfNull(key);
        (List<string> ids, _) = RunTable.IdsAndLabels(runFolder);
        if (key == "id")
        {
            return [.. ids];
        }
        string? field = key.StartsWith("field:", StringComparison.Ordinal) && key.Length > 6 ? key[6..] : null;
        if (key is not ("first-word" or "last-word") && field == null)
        {
            throw new ArgumentException($"control key \"{key}\": expected {KeySpellings}");
        }
        if (inputPath == null)
        {
            throw new ArgumentException($"control key \"{key}\" reads each row's {(field ?? "text")} from the run's input file; give it");
        }
        RunRecord record = RunRecord.Read(runFolder);
        var input = record.Settings["input"]!.AsObject();
        string expected = input["sha256"]!.GetValue<string>();
        string actual = FileDigest.Sha256(inputPath);
        if (actual != expected)
        {
            throw new RunFolderException(runFolder, $"{inputPath} is not this run's input: its SHA-256 is {actual}, and the run read a file ({input["file"]}) with SHA-256 {expected}");
        }
        var fields = new InputFields
        {
            Text = input["text_field"]!.GetValue<string>(),
            Id = input["id_field"]!.GetValue<string>(),
            IdRequired = input["id_required"]!.GetValue<bool>(),
            Label = field ?? input["label_field"]!.GetValue<string>(),
            LabelRequired = field != null || input["label_required"]!.GetValue<bool>(),
        };
        var byId = new Dictionary<string, string>(StringComparer.Ordinal);
        using (TextInputReader reader = TextInputReader.Open(inputPath, Spellings.Parse<InputFormat>("format", input["format"]!.GetValue<string>()), fields))
        {
            foreach (InputRecord r in reader.Records())
            {
                if (r.Rejection != null)
                {
                    continue;
                }
                string type = field != null ? r.Label : WordType(r.Text!, last: key == "last-word");
                if (byId.TryGetValue(r.Id, out string? other) && other != type)
                {
                    throw new RunFolderException(runFolder, $"{inputPath} line {r.Line}: id \"{r.Id}\" appears twice with different types (\"{other}\", \"{type}\"); a control task needs ids that name one row");
                }
                byId[r.Id] = type;
            }
        }
        string[] types = new string[ids.Count];
        for (int i = 0; i < ids.Count; i++)
        {
            types[i] = byId.TryGetValue(ids[i], out string? t) ? t
                : throw new RunFolderException(runFolder, $"row {i + 1} (id \"{ids[i]}\") has no record in {inputPath}{(field != null ? $" with a field \"{field}\"" : "")}");
        }
        return types;
    }

    /// <summary>
    /// Fits the probe on the training rows' task labels and on their control labels (drawn for the training and test
    /// rows' types from the training labels' distribution), and scores both on the test rows.
    /// </summary>
    public static SelectivityResult Measure(RunFeatures train, IReadOnlyList<string> trainTypes, RunFeatures test, IReadOnlyList<string> testTypes,
        ProbeKind kind, ProbeOptions options, ulong seed = 1, IProgress<ProbeSearchProgress>? progress = null)
    {
        ControlFit control = FitControl(train, trainTypes, test, testTypes, kind, options, seed, progress);
        ClassificationReport task = Score(kind.FitAndPredict(train.Values, train.Rows, train.Width, train.Labels, test.Values, test.Rows, options, false, progress), test.Labels);
        return new SelectivityResult(kind, task, control);
    }

    /// <summary>Fits the probe on the control labels of the training rows' types and scores it on the test rows' control labels.</summary>
    /// <exception cref="ArgumentException">A type list is not one a row.</exception>
    public static ControlFit FitControl(RunFeatures train, IReadOnlyList<string> trainTypes, RunFeatures test, IReadOnlyList<string> testTypes,
        ProbeKind kind, ProbeOptions options, ulong seed = 1, IProgress<ProbeSearchProgress>? progress = null)
    {
        ArgumentNullException.ThrowIfNull(train);
        ArgumentNullException.ThrowIfNull(test);
        ArgumentNullException.ThrowIfNull(trainTypes);
        ArgumentNullException.ThrowIfNull(testTypes);
        ArgumentNullException.ThrowIfNull(options);
        if (trainTypes.Count != train.Rows || testTypes.Count != test.Rows)
        {
            throw new ArgumentException($"expected a type for each of {train.Rows} training and {test.Rows} test rows; got {trainTypes.Count} and {testTypes.Count}");
        }
        string[] controlTrain = Labels(trainTypes, train.Labels, seed);
        string[] controlTest = Labels(testTypes, train.Labels, seed);
        ClassificationReport control = Score(kind.FitAndPredict(train.Values, train.Rows, train.Width, controlTrain, test.Values, test.Rows, options, true, progress), controlTest);
        HashSet<string> seen = [.. trainTypes];
        string majority = controlTrain.GroupBy(l => l, StringComparer.Ordinal).OrderByDescending(g => g.Count()).ThenBy(g => g.Key, StringComparer.Ordinal).First().Key;
        int lookupHits = 0, majorityHits = 0;
        for (int i = 0; i < testTypes.Count; i++)
        {
            lookupHits += (seen.Contains(testTypes[i]) ? controlTest[i] : majority) == controlTest[i] ? 1 : 0;
            majorityHits += controlTest[i] == majority ? 1 : 0;
        }
        return new ControlFit(control, seen.Count, testTypes.Count(t => !seen.Contains(t)), lookupHits / (double)testTypes.Count, majorityHits / (double)testTypes.Count);
    }

    /// <summary>A report of test probabilities against labels; a label the probe never saw counts as wrong.</summary>
    private static ClassificationReport Score((IReadOnlyList<string> Classes, double[] P) fitted, IReadOnlyList<string> labels)
    {
        var index = new Dictionary<string, int>(StringComparer.Ordinal);
        for (int j = 0; j < fitted.Classes.Count; j++)
        {
            index[fitted.Classes[j]] = j;
        }
        int k = fitted.Classes.Count;
        // A test label outside the fitted classes gets its own column of probability 0: wrong, at the clipped log loss.
        string[] extra = [.. labels.Where(l => !index.ContainsKey(l)).Distinct(StringComparer.Ordinal)];
        foreach (string e in extra)
        {
            index[e] = index.Count;
        }
        int total = index.Count;
        double[] p = new double[labels.Count * total];
        for (int i = 0; i < labels.Count; i++)
        {
            fitted.P.AsSpan(i * k, k).CopyTo(p.AsSpan(i * total, k));
        }
        return ClassificationReport.Score(p, [.. labels.Select(l => index[l])], total);
    }
}
