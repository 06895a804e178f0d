using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;

namespace Assay.Evaluation;

/// <summary>A study file is malformed or names something missing; the message names the file and the field.</summary>
public sealed class StudyException : InvalidInputException
{
    /// <summary>Creates the exception.</summary>
    public StudyException(string path, string problem, Exception? inner = null)
        : base(path, $"{path}: {problem}", inner)
    {
    }
}

/// <summary>
/// One grid of a study: every model × prompt × feature kind, probed on a labelled task. The file is JSON:
/// <code>
/// {
///   "train": "tasks/x/train.jsonl", "test": "tasks/x/test.jsonl",   // labelled texts (id, text, label)
///   "train_every": 8, "test_every": 4,                             // every k-th record of each label (1 = all)
///   "models": { "init": "models/a-init", "final": "models/a" },   // name → checkpoint folder, in order
///   "series": { "folder": "models/run1", "step": "name" },        // and/or every checkpoint of a run, by step
///   "prompts": { "kind-of": "{text} It is a kind of" },            // name → template
///   "features": ["hidden", "cmean", "words", "zero-shot"],
///   "verbalizer": "labels.txt",                                    // for words and zero-shot
///   "folds": 3, "strengths": [0.01, 0.1, 1],                       // the probe's cross-validation
///   "layers": true,                                                // a probe per layer (last token), per model and prompt
///   "control": "first-word", "mlp": 64,                            // selectivity of the last layer: linear and MLP probes
///   "compare": [["hidden", "cmean"]]                               // paired bootstraps of two feature kinds
/// }
/// </code>
/// The last four fields are optional (the probing methods; <c>control</c> takes first-word, last-word or id).
/// Paths are relative to the study file. Feature kinds: <c>hidden</c> (the last layer's state at the last token),
/// <c>hidden:N</c> (layer N), <c>cmean</c> (Φp), <c>words</c> (a probe on the verbalizer words' next-word
/// probabilities only) and <c>zero-shot</c> (the verbalizer's label scores, no training).
/// </summary>
public sealed partial record StudySpec
{
    /// <summary>The study file.</summary>
    public required string Path { get; init; }

    /// <summary>Labelled training texts (absolute path).</summary>
    public required string Train { get; init; }

    /// <summary>Labelled test texts (absolute path).</summary>
    public required string Test { get; init; }

    /// <summary>Keep every k-th training record of each label (and at least as many as there are folds).</summary>
    public int TrainEvery { get; init; } = 1;

    /// <summary>Keep every k-th test record of each label (and at least one).</summary>
    public int TestEvery { get; init; } = 1;

    /// <summary>Model name and checkpoint folder (absolute), in the file's order.</summary>
    public required IReadOnlyList<(string Name, string Folder)> Models { get; init; }

    /// <summary>Prompt name and template, in the file's order.</summary>
    public required IReadOnlyList<(string Name, string Template)> Prompts { get; init; }

    /// <summary>Feature kinds, in the file's order.</summary>
    public required IReadOnlyList<string> Features { get; init; }

    /// <summary>Verbalizer file (absolute), or null when no feature needs one.</summary>
    public string? Verbalizer { get; init; }

    /// <summary>How the probes are fitted.</summary>
    public ProbeOptions Probe { get; init; } = new();

    /// <summary>Sweep the layers: a probe per layer of the last token's hidden state, per model and prompt.</summary>
    public bool Layers { get; init; }

    /// <summary>The control task's type key (see <see cref="ControlTask"/>), or null for no selectivity.</summary>
    public string? Control { get; init; }

    /// <summary>Hidden units of the MLP probe whose selectivity is measured beside the linear probe's (0: linear only).</summary>
    public int Mlp { get; init; }

    /// <summary>Pairs of feature kinds compared by a paired bootstrap on the same test rows, per model and prompt.</summary>
    public IReadOnlyList<(string A, string B)> Compare { get; init; } = [];

    [GeneratedRegex("^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")]
    private static partial Regex NamePattern();

    [GeneratedRegex("^(hidden(:-?[0-9]+)?|cmean|words|zero-shot)$")]
    private static partial Regex FeaturePattern();

    /// <summary>The field of <see cref="ToJson"/> that names the study file itself.</summary>
    internal const string FileField = "study_file";

    /// <summary>Reads and checks a study file.</summary>
    /// <exception cref="StudyException">Not JSON, a field missing or of the wrong kind, an unknown feature, a bad name, or a missing file or folder.</exception>
    public static StudySpec Load(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        path = System.IO.Path.GetFullPath(path);
        if (!File.Exists(path))
        {
            throw new StudyException(path, "no such study file");
        }
        JsonObject o;
        try
        {
            o = JsonNode.Parse(InputFile.ReadAllBytes(path), documentOptions: new JsonDocumentOptions { CommentHandling = JsonCommentHandling.Skip })?.AsObject()
                ?? throw new StudyException(path, "expected a JSON object");
        }
        catch (Exception e) when (e is JsonException or InvalidOperationException)
        {
            throw new StudyException(path, $"not a JSON object ({e.Message})", e);
        }
        string folder = System.IO.Path.GetDirectoryName(path)!;
        string known = "train, test, train_every, test_every, models, series, prompts, features, verbalizer, folds, strengths, layers, control, mlp, compare";
        string? unknown = o.Select(p => p.Key).FirstOrDefault(k => !known.Split(", ").Contains(k));
        if (unknown != null)
        {
            throw new StudyException(path, $"unknown field \"{unknown}\"; the fields are {known}");
        }

        string ExistingFile(string field)
        {
            string value = Text(path, o, field);
            string full = System.IO.Path.GetFullPath(System.IO.Path.Combine(folder, value));
            return System.IO.File.Exists(full) ? full : throw new StudyException(path, $"{field}: no such file {full}");
        }

        var models = (o.ContainsKey("models") || !o.ContainsKey("series") ? Map(path, o, "models") : []).Select(m =>
        {
            string full = System.IO.Path.GetFullPath(System.IO.Path.Combine(folder, m.Value));
            return Directory.Exists(full) ? (m.Name, full) : throw new StudyException(path, $"models.{m.Name}: no such folder {full}");
        }).ToList();
        if (o.ContainsKey("series"))
        {
            foreach ((string name, string checkpoint) in Series(path, folder, o["series"]))
            {
                if (models.Any(m => m.Name == name))
                {
                    throw new StudyException(path, $"series: its checkpoint {name} has the name of a model in models");
                }
                models.Add((name, checkpoint));
            }
        }
        var prompts = Map(path, o, "prompts");
        string[] features = o["features"] is JsonArray fa && fa.Count > 0 && fa.All(f => f is JsonValue v && v.TryGetValue(out string? _))
            ? [.. fa.Select(f => f!.GetValue<string>())]
            : throw new StudyException(path, "features: expected a non-empty list of feature kinds");
        string? bad = features.FirstOrDefault(f => !FeaturePattern().IsMatch(f));
        if (bad != null)
        {
            throw new StudyException(path, $"features: unknown kind \"{bad}\"; the kinds are hidden, hidden:N, cmean, words, zero-shot");
        }
        if (features.Distinct(StringComparer.Ordinal).Count() != features.Length)
        {
            throw new StudyException(path, "features: a kind is listed twice");
        }
        bool needsWords = features.Any(f => f is "words" or "zero-shot");
        string? verbalizer = o.ContainsKey("verbalizer") ? ExistingFile("verbalizer") : null;
        if (needsWords && verbalizer == null)
        {
            throw new StudyException(path, "verbalizer: words and zero-shot need a verbalizer file");
        }

        var probe = new ProbeOptions();
        if (o.ContainsKey("folds"))
        {
            probe = probe with { Folds = Count(path, o, "folds", 2) };
        }
        if (o.ContainsKey("strengths"))
        {
            probe = probe with
            {
                InverseRegularizations = o["strengths"] is JsonArray sa && sa.Count > 0
                    && sa.All(s => s is JsonValue v && v.TryGetValue(out double c) && c > 0 && double.IsFinite(c))
                    ? [.. sa.Select(s => s!.GetValue<double>())]
                    : throw new StudyException(path, "strengths: expected a non-empty list of positive numbers"),
            };
        }

        bool layers = o.ContainsKey("layers") && (o["layers"] is JsonValue lv && lv.TryGetValue(out bool l) ? l
            : throw new StudyException(path, "layers: expected true or false"));
        string? control = o.ContainsKey("control") ? Text(path, o, "control") : null;
        if (control != null && control is not ("first-word" or "last-word" or "id"))
        {
            throw new StudyException(path, $"control: \"{control}\" is not a type key of a study; expected first-word, last-word or id (the subsampled task keeps id, text and label only; assay probe takes field:NAME)");
        }
        if (control != null && !features.Contains("hidden"))
        {
            throw new StudyException(path, "control: selectivity is measured on the hidden feature; list \"hidden\" in features");
        }
        int mlp = o.ContainsKey("mlp") ? Count(path, o, "mlp", 0) : 0;
        if (mlp > 0 && control == null)
        {
            throw new StudyException(path, "mlp: the MLP probe is fitted for selectivity; give control too");
        }
        var compare = new List<(string, string)>();
        if (o.ContainsKey("compare"))
        {
            if (o["compare"] is not JsonArray pairs)
            {
                throw new StudyException(path, "compare: expected a list of [feature, feature] pairs");
            }
            foreach (JsonNode? pair in pairs)
            {
                string[] two = pair is JsonArray pa && pa.Count == 2 && pa.All(f => f is JsonValue v && v.TryGetValue(out string? _))
                    ? [.. pa.Select(f => f!.GetValue<string>())]
                    : throw new StudyException(path, "compare: expected a list of [feature, feature] pairs");
                string? missing = two.FirstOrDefault(f => !features.Contains(f));
                if (missing != null || two[0] == two[1])
                {
                    throw new StudyException(path, missing != null ? $"compare: \"{missing}\" is not one of the features" : $"compare: \"{two[0]}\" is compared with itself");
                }
                compare.Add((two[0], two[1]));
            }
        }

        return new StudySpec
        {
            Layers = layers,
            Control = control,
            Mlp = mlp,
            Compare = compare,
            Path = path,
            Train = ExistingFile("train"),
            Test = ExistingFile("test"),
            TrainEvery = o.ContainsKey("train_every") ? Count(path, o, "train_every", 1) : 1,
            TestEvery = o.ContainsKey("test_every") ? Count(path, o, "test_every", 1) : 1,
            Models = models,
            Prompts = prompts,
            Features = features,
            Verbalizer = verbalizer,
            Probe = probe,
        };
    }

    /// <summary>The study as resolved (absolute paths, and the study file's own), as stored beside the results to tell a rerun, an edited study file and another study apart.</summary>
    public JsonObject ToJson()
    {
        JsonObject json = Fields();
        // The probing methods are stored only when asked for, so a folder made before they existed stays the same study.
        if (Layers)
        {
            json["layers"] = true;
        }
        if (Control != null)
        {
            json["control"] = Control;
            json["mlp"] = Mlp;
        }
        if (Compare.Count > 0)
        {
            json["compare"] = new JsonArray([.. Compare.Select(p => new JsonArray(p.A, p.B))]);
        }
        return json;
    }

    private JsonObject Fields() => new()
    {
        [FileField] = Path,
        ["train"] = Train,
        ["test"] = Test,
        ["train_every"] = TrainEvery,
        ["test_every"] = TestEvery,
        ["models"] = new JsonObject(Models.Select(m => KeyValuePair.Create(m.Name, (JsonNode?)JsonValue.Create(m.Folder)))),
        ["prompts"] = new JsonObject(Prompts.Select(p => KeyValuePair.Create(p.Name, (JsonNode?)JsonValue.Create(p.Template)))),
        ["features"] = new JsonArray([.. Features.Select(f => JsonValue.Create(f))]),
        ["verbalizer"] = Verbalizer,
        ["folds"] = Probe.Folds,
        ["strengths"] = new JsonArray([.. Probe.InverseRegularizations.Select(s => JsonValue.Create(s))]),
    };

    [GeneratedRegex("([0-9]+)[^0-9]*$")]
    private static partial Regex LastNumber();

    /// <summary>
    /// The checkpoints of a series: every sub-folder of <c>series.folder</c> that holds a config.json, ordered by its
    /// training step — the last number in the folder's name (<c>"step": "name"</c>, the default), or a whole-number
    /// field of a JSON file in it (<c>"step": "FILE:FIELD"</c>, e.g. <c>"trainer_state.json:global_step"</c>) — and
    /// named <c>stepN</c>.
    /// </summary>
    private static List<(string Name, string Folder)> Series(string path, string folder, JsonNode? node)
    {
        if (node is not JsonObject series || series["folder"] is not JsonValue fv || !fv.TryGetValue(out string? relative) || relative.Length == 0)
        {
            throw new StudyException(path, "series: expected an object with a folder (and optionally step: name or FILE:FIELD)");
        }
        string? unknown = series.Select(p => p.Key).FirstOrDefault(k => k is not ("folder" or "step"));
        if (unknown != null)
        {
            throw new StudyException(path, $"series: unknown field \"{unknown}\"; the fields are folder and step");
        }
        string step = series["step"] is JsonValue sv && sv.TryGetValue(out string? s) ? s : series.ContainsKey("step") ? throw new StudyException(path, "series.step: expected name or FILE:FIELD") : "name";
        string[]? fileField = step == "name" ? null : step.Split(':') is [string file, string field] && file.Length > 0 && field.Length > 0 ? [file, field]
            : throw new StudyException(path, $"series.step: \"{step}\" is neither name nor FILE:FIELD");
        string root = System.IO.Path.GetFullPath(System.IO.Path.Combine(folder, relative));
        if (!Directory.Exists(root))
        {
            throw new StudyException(path, $"series.folder: no such folder {root}");
        }
        var checkpoints = new List<(long Step, string Folder)>();
        foreach (string sub in Directory.EnumerateDirectories(root).Where(d => File.Exists(System.IO.Path.Combine(d, Config.ModelConfig.FileName))))
        {
            long n;
            if (fileField == null)
            {
                Match m = LastNumber().Match(System.IO.Path.GetFileName(sub));
                n = m.Success && long.TryParse(m.Groups[1].Value, NumberStyles.None, CultureInfo.InvariantCulture, out long v) ? v
                    : throw new StudyException(path, $"series: {sub} has no step number in its name (give step: FILE:FIELD to read it from a file)");
            }
            else
            {
                string stateFile = System.IO.Path.Combine(sub, fileField[0]);
                JsonNode? state;
                try
                {
                    state = File.Exists(stateFile) ? JsonNode.Parse(InputFile.ReadAllBytes(stateFile)) : null;
                }
                catch (JsonException e)
                {
                    throw new StudyException(path, $"series: {stateFile} is not JSON ({e.Message})", e);
                }
                n = state is JsonObject so && so[fileField[1]] is JsonValue value && value.TryGetValue(out long read) && read >= 0 ? read
                    : throw new StudyException(path, $"series: {stateFile} has no whole-number field \"{fileField[1]}\"");
            }
            checkpoints.Add((n, sub));
        }
        if (checkpoints.Count == 0)
        {
            throw new StudyException(path, $"series.folder: {root} holds no checkpoint folder (a folder with {Config.ModelConfig.FileName})");
        }
        var twice = checkpoints.GroupBy(c => c.Step).FirstOrDefault(g => g.Count() > 1);
        if (twice != null)
        {
            throw new StudyException(path, string.Create(CultureInfo.InvariantCulture, $"series: step {twice.Key} is both {string.Join(" and ", twice.Select(c => c.Folder).Order(StringComparer.Ordinal))}"));
        }
        return [.. checkpoints.OrderBy(c => c.Step).Select(c => (string.Create(CultureInfo.InvariantCulture, $"step{c.Step}"), c.Folder))];
    }

    private static string Text(string path, JsonObject o, string field) =>
        o[field] is JsonValue v && v.TryGetValue(out string? s) && s.Length > 0
            ? s
            : throw new StudyException(path, $"{field}: expected a non-empty string");

    private static int Count(string path, JsonObject o, string field, int least) =>
        o[field] is JsonValue v && v.TryGetValue(out int n) && n >= least
            ? n
            : throw new StudyException(path, string.Create(CultureInfo.InvariantCulture, $"{field}: expected a whole number ≥ {least}"));

    private static List<(string Name, string Value)> Map(string path, JsonObject o, string field)
    {
        if (o[field] is not JsonObject map || map.Count == 0)
        {
            throw new StudyException(path, $"{field}: expected an object of name → value, with at least one entry");
        }
        var result = new List<(string, string)>();
        foreach ((string name, JsonNode? value) in map)
        {
            if (!NamePattern().IsMatch(name))
            {
                throw new StudyException(path, $"{field}: name \"{name}\" must be 1–64 letters, digits, '.', '_' or '-', starting with a letter or digit");
            }
            result.Add(value is JsonValue v && v.TryGetValue(out string? s) && s.Length > 0
                ? (name, s)
                : throw new StudyException(path, $"{field}.{name}: expected a non-empty string"));
        }
        return result;
    }
}
