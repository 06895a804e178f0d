using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Config;
using Assay.Weights;

namespace Assay.Model;

/// <summary>A manifest entry is malformed, or does not describe the folder it is used with.</summary>
public sealed class ManifestException : InvalidInputException
{
    /// <summary>Creates the exception.</summary>
    public ManifestException(string filePath, string problem)
        : base(filePath, $"{filePath}: {problem}")
    {
    }
}

/// <summary>
/// Entries of the weights manifest (one JSON file per model: architecture, parameter count, tensor inventory,
/// licence, provenance and, once pinned, every file's size and SHA-256), for carrying weights into air-gapped machines:
/// pin a folder you trust into an entry, then verify copies of it against the entry.
/// </summary>
public static class WeightsManifest
{
    private static readonly JsonSerializerOptions Indented = new() { WriteIndented = true };

    /// <summary>
    /// Pins a model folder: checks its config and tensors (against the entry's architecture and inventory when the
    /// entry exists, e.g. a published family entry without hashes), then records every file's size and SHA-256.
    /// </summary>
    /// <exception cref="ManifestException">The folder does not match the entry, or the entry is already pinned and
    /// <paramref name="repin"/> is off.</exception>
    public static void Pin(string modelFolder, string entryPath, string? licence = null, string? provenance = null, bool repin = false)
    {
        ArgumentNullException.ThrowIfNull(modelFolder);
        ArgumentNullException.ThrowIfNull(entryPath);
        string configPath = Path.Combine(modelFolder, ModelConfig.FileName);
        ModelConfig config = ModelConfig.Load(configPath);
        using (SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(modelFolder))
        {
            LanguageModel.CheckCheckpoint(checkpoint, config, configPath);
        }

        JsonObject entry;
        if (File.Exists(entryPath))
        {
            entry = Load(entryPath);
            if (entry["files"] is JsonArray && !repin)
            {
                throw new ManifestException(entryPath, "is already pinned; verify a folder against it, or pass --repin to replace its hashes");
            }
            ModelConfig pinned = Architecture(entryPath, entry);
            if (pinned != config)
            {
                throw new ManifestException(entryPath, $"its architecture ({Describe(pinned)}) is not the folder's ({Describe(config)}, {configPath})");
            }
            CheckInventory(entryPath, entry, config);
        }
        else
        {
            entry = new JsonObject
            {
                ["name"] = Path.GetFileNameWithoutExtension(entryPath),
                ["family"] = config.FamilyName,
                ["architecture"] = JsonNode.Parse(InputFile.ReadAllBytes(configPath)),
                ["parameter_count"] = config.ParameterCount,
                ["parameter_count_source"] = "counted from the architecture, tied head counted once",
                ["licence"] = licence ?? "unknown: record it with --licence",
                ["provenance"] = provenance ?? "unknown: record it with --provenance",
                ["files"] = null,
                ["tensors"] = Inventory(config),
            };
        }
        if (licence != null)
        {
            entry["licence"] = licence;
        }
        if (provenance != null)
        {
            entry["provenance"] = provenance;
        }
        var outside = new Dictionary<string, string>(StringComparer.Ordinal);
        List<ModelFile> described = Describe(modelFolder, outside);
        if (outside.Count > 0)
        {
            throw new ManifestException(entryPath, $"cannot pin {modelFolder}: {outside.Values.First()}; pin a folder that holds its own files");
        }
        var files = new JsonArray();
        foreach (ModelFile f in described)
        {
            files.Add(new JsonObject { ["name"] = f.Name, ["bytes"] = f.Bytes, ["sha256"] = f.Sha256 });
        }
        entry["files"] = files;
        Directory.CreateDirectory(Path.GetDirectoryName(Path.GetFullPath(entryPath))!);
        File.WriteAllText(entryPath, entry.ToJsonString(Indented) + "\n");
    }

    /// <summary>
    /// Compares a folder with a pinned entry: every pinned file present with its size and SHA-256, and no other file,
    /// in the folder and its subfolders. A file or folder that a symbolic link takes outside the model folder is a
    /// difference too (its bytes are not the folder's). Returns one line per difference, naming the file and both
    /// values; none when the folder matches.
    /// </summary>
    /// <exception cref="ManifestException">The entry is malformed or not pinned.</exception>
    public static IReadOnlyList<string> Verify(string modelFolder, string entryPath)
    {
        ArgumentNullException.ThrowIfNull(modelFolder);
        ArgumentNullException.ThrowIfNull(entryPath);
        JsonObject entry = Load(entryPath);
        if (entry["files"] is not JsonArray pinned)
        {
            throw new ManifestException(entryPath, "has no pinned files yet; pin a folder you trust first (assay manifest pin)");
        }
        if (!Directory.Exists(modelFolder))
        {
            throw new DirectoryNotFoundException($"{modelFolder}: no such model folder");
        }
        var outside = new Dictionary<string, string>(StringComparer.Ordinal);
        var actual = Describe(modelFolder, outside).ToDictionary(f => f.Name, StringComparer.Ordinal);
        var problems = new List<string>(outside.Values);
        var expectedNames = new HashSet<string>(StringComparer.Ordinal);
        foreach (JsonNode? node in pinned)
        {
            string name = node?["name"]?.GetValue<string>() ?? throw new ManifestException(entryPath, "a pinned file has no name");
            long bytes = node["bytes"]?.GetValue<long>() ?? throw new ManifestException(entryPath, $"pinned file {name} has no size");
            string sha = node["sha256"]?.GetValue<string>() ?? throw new ManifestException(entryPath, $"pinned file {name} has no sha256");
            expectedNames.Add(name);
            if (outside.ContainsKey(name))
            {
                continue;
            }
            if (!actual.TryGetValue(name, out ModelFile? f))
            {
                problems.Add($"{Path.Combine(modelFolder, name)}: missing (pinned: {bytes.ToString("N0", CultureInfo.InvariantCulture)} bytes, sha256 {sha})");
            }
            else if (f.Sha256 != sha || f.Bytes != bytes)
            {
                problems.Add(string.Create(CultureInfo.InvariantCulture,
                    $"{Path.Combine(modelFolder, name)}: sha256 {f.Sha256} ({f.Bytes:N0} bytes); pinned {sha} ({bytes:N0} bytes)"));
            }
        }
        foreach (ModelFile extra in actual.Values.Where(f => !expectedNames.Contains(f.Name)))
        {
            problems.Add($"{Path.Combine(modelFolder, extra.Name)}: not in the manifest entry (sha256 {extra.Sha256})");
        }
        return problems;
    }

    /// <summary>Deepest subfolder a manifest walks into.</summary>
    private const int MaxDepth = 16;

    /// <summary>
    /// Every file in <paramref name="folder"/> and its subfolders (names relative, '/'-separated, ordinal order),
    /// hashed; a link whose target lies outside the folder is not followed but told to <paramref name="outside"/>.
    /// </summary>
    private static List<ModelFile> Describe(string folder, Dictionary<string, string> outside)
    {
        string root = Path.TrimEndingDirectorySeparator(Path.GetFullPath(folder));
        string realRoot = Path.TrimEndingDirectorySeparator(Directory.ResolveLinkTarget(root, returnFinalTarget: true)?.FullName ?? root);
        var files = new List<ModelFile>();
        Walk(root, "", 0);
        return [.. files.OrderBy(f => f.Name, StringComparer.Ordinal)];

        void Walk(string path, string prefix, int depth)
        {
            foreach (string entry in Directory.EnumerateFileSystemEntries(path).Order(StringComparer.Ordinal))
            {
                string name = prefix + Path.GetFileName(entry);
                string target = InputFile.Resolve(entry);
                if (target != entry && !Inside(Path.GetFullPath(target), realRoot) && !Inside(Path.GetFullPath(target), root))
                {
                    outside[name] = $"{entry}: a link to {target}, outside the model folder";
                    continue;
                }
                if (Directory.Exists(entry))
                {
                    if (depth + 1 > MaxDepth)
                    {
                        throw new InputFileException(entry, string.Create(CultureInfo.InvariantCulture, $"{entry}: more than {MaxDepth} folders deep (a folder linked into itself?)"));
                    }
                    Walk(entry, name + "/", depth + 1);
                    continue;
                }
                (long bytes, string sha) = FileDigest.Of(entry);
                files.Add(new ModelFile(name, bytes, sha));
            }
        }
    }

    private static bool Inside(string path, string root) => path.StartsWith(root + Path.DirectorySeparatorChar, StringComparison.Ordinal);

    /// <summary>The parameters an architecture implies, as the manifest lists them.</summary>
    private static JsonArray Inventory(ModelConfig config)
    {
        var tensors = new JsonArray();
        foreach ((string name, long[] shape) in CheckpointLayout.For(config).ExpectedParameters(config))
        {
            tensors.Add(new JsonObject { ["name"] = name, ["shape"] = new JsonArray([.. shape.Select(s => JsonValue.Create(s))]) });
        }
        return tensors;
    }

    private static void CheckInventory(string entryPath, JsonObject entry, ModelConfig config)
    {
        if (entry["tensors"] is not JsonArray listed)
        {
            throw new ManifestException(entryPath, "has no tensor inventory");
        }
        if (!JsonNode.DeepEquals(listed, Inventory(config)))
        {
            throw new ManifestException(entryPath, "its tensor inventory is not what its architecture implies");
        }
    }

    private static ModelConfig Architecture(string entryPath, JsonObject entry)
    {
        if (entry["architecture"] is not JsonObject architecture)
        {
            throw new ManifestException(entryPath, "has no architecture object");
        }
        using JsonDocument doc = JsonDocument.Parse(architecture.ToJsonString());
        return ModelConfig.Parse(entryPath + " (architecture)", doc.RootElement);
    }

    private static JsonObject Load(string entryPath)
    {
        if (!File.Exists(entryPath))
        {
            throw new ManifestException(entryPath, "no such manifest entry");
        }
        using JsonDocument? doc = JsonInput.TryParse(InputFile.ReadAllBytes(entryPath), maxDepth: 16, out string problem);
        if (doc == null || doc.RootElement.ValueKind != JsonValueKind.Object)
        {
            throw new ManifestException(entryPath, doc == null ? problem : "expected a JSON object");
        }
        return JsonObject.Create(doc.RootElement.Clone())!;
    }

    private static string Describe(ModelConfig c) => string.Create(CultureInfo.InvariantCulture,
        $"{c.ModelType}, {c.Layers} layers, width {c.Width}, {c.Heads} heads ({c.KeyValueHeads} key/value) of {c.HeadWidth}, context {c.ContextLength}, vocabulary {c.VocabularySize}, MLP {c.InnerWidth}, {c.Activation}, {(c.TiedHead ? "tied" : "untied")} head");
}
