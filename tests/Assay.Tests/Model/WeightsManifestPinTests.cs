using System.Security.Cryptography;
using System.Text.Json;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Support;

namespace Assay.Tests.Model;

/// <summary>Pin and verify: a pinned folder matches, and a one-byte change in any file is caught and named.</summary>
public sealed class WeightsManifestPinTests
{
    private static readonly CheckpointSpec Spec = new() { Width = 32, Heads = 4, Layers = 2, Context = 16 };

    [Fact]
    public void Verify_catches_a_one_byte_change_in_any_file_of_a_pinned_folder()
    {
        using var temp = new TempFolder();
        string folder = SyntheticCheckpoint.Write(Spec, temp.File("model"));
        string entry = temp.File("manifest/small.json");
        WeightsManifest.Pin(folder, entry, licence: "test weights", provenance: "Assay.Fixtures seed 1");
        Assert.Empty(WeightsManifest.Verify(folder, entry));

        using (JsonDocument doc = JsonDocument.Parse(File.ReadAllBytes(entry)))
        {
            // The pinned hashes are coreutils-independent here: each one recomputed with .NET's SHA-256 of the file.
            foreach (JsonElement f in doc.RootElement.GetProperty("files").EnumerateArray())
            {
                byte[] bytes = File.ReadAllBytes(Path.Combine(folder, f.GetProperty("name").GetString()!));
                Assert.Equal(Convert.ToHexStringLower(SHA256.HashData(bytes)), f.GetProperty("sha256").GetString());
            }
            Assert.Equal("test weights", doc.RootElement.GetProperty("licence").GetString());
        }

        string[] files = Directory.GetFiles(folder);
        Assert.True(files.Length >= 4);
        var rng = new Random(4);
        foreach (string path in files)
        {
            byte[] original = File.ReadAllBytes(path);
            byte[] changed = (byte[])original.Clone();
            int at = rng.Next(changed.Length);
            changed[at] ^= 0x01;
            File.WriteAllBytes(path, changed);
            IReadOnlyList<string> problems = WeightsManifest.Verify(folder, entry);
            string single = Assert.Single(problems);
            Assert.Contains(Path.GetFileName(path), single, StringComparison.Ordinal);
            Assert.Contains(Convert.ToHexStringLower(SHA256.HashData(changed)), single, StringComparison.Ordinal);
            Assert.Contains(Convert.ToHexStringLower(SHA256.HashData(original)), single, StringComparison.Ordinal);
            File.WriteAllBytes(path, original);
        }

        File.Move(Path.Combine(folder, "merges.txt"), temp.File("merges.txt"));
        File.WriteAllText(Path.Combine(folder, "notes.txt"), "x");
        IReadOnlyList<string> two = WeightsManifest.Verify(folder, entry);
        Assert.Equal(2, two.Count);
        Assert.Contains(two, p => p.Contains("merges.txt: missing", StringComparison.Ordinal));
        Assert.Contains(two, p => p.Contains("notes.txt: not in the manifest entry", StringComparison.Ordinal));
    }

    [Fact]
    public void Pinning_checks_the_folder_against_an_existing_entry()
    {
        using var temp = new TempFolder();
        string entry = temp.File("small.json");
        WeightsManifest.Pin(SyntheticCheckpoint.Write(Spec, temp.File("a")), entry);
        Assert.Contains("already pinned", Assert.Throws<ManifestException>(() =>
            WeightsManifest.Pin(temp.File("a"), entry)).Message, StringComparison.Ordinal);

        string other = SyntheticCheckpoint.Write(Spec with { Layers = 3 }, temp.File("b"));
        Assert.Contains("3 layers", Assert.Throws<ManifestException>(() =>
            WeightsManifest.Pin(other, entry, repin: true)).Message, StringComparison.Ordinal);
        Assert.Contains("no pinned files", Assert.Throws<ManifestException>(() =>
            WeightsManifest.Verify(other, Path.Combine(RepositoryManifest(), "gpt2-124m.json"))).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_published_family_entry_is_pinned_by_a_folder_of_its_shape()
    {
        using var temp = new TempFolder();
        string entry = temp.File("gpt2-124m.json");
        File.Copy(Path.Combine(RepositoryManifest(), "gpt2-124m.json"), entry);
        string folder = Checkpoints.Folder(CheckpointSpec.Gpt2Small);
        WeightsManifest.Pin(folder, entry);
        Assert.Empty(WeightsManifest.Verify(folder, entry));
        using JsonDocument doc = JsonDocument.Parse(File.ReadAllBytes(entry));
        Assert.Equal(124_439_808L, doc.RootElement.GetProperty("parameter_count").GetInt64());   // published GPT-2 small figure, kept
        Assert.StartsWith("modified MIT", doc.RootElement.GetProperty("licence").GetString(), StringComparison.Ordinal);
    }

    [Fact]
    public void A_rotary_family_folder_is_pinned_with_its_family_and_inventory()
    {
        using var temp = new TempFolder();
        string entry = temp.File("qwen2-test.json");
        string folder = Checkpoints.Folder(ForwardParityTests.Families["qwen2-bias-window"]);
        WeightsManifest.Pin(folder, entry, licence: "test weights", provenance: "Assay.Fixtures seed 1");
        Assert.Empty(WeightsManifest.Verify(folder, entry));
        using (JsonDocument doc = JsonDocument.Parse(File.ReadAllBytes(entry)))
        {
            Assert.Equal("Qwen2-style", doc.RootElement.GetProperty("family").GetString());
            Assert.Contains(doc.RootElement.GetProperty("tensors").EnumerateArray(), t => t.GetProperty("name").GetString() == "model.layers.2.self_attn.k_proj.bias");
        }
        // A folder of another family's shape is refused against it.
        string llama = Checkpoints.Folder(ForwardParityTests.Families["llama-gqa-width60"]);
        Assert.Contains("is not the folder's", Assert.Throws<ManifestException>(() => WeightsManifest.Pin(llama, entry, repin: true)).Message, StringComparison.Ordinal);
    }

    internal static string RepositoryManifest() => Path.Combine(RepositoryRoot(), "weights-manifest");

    /// <summary>The checkout the tests were built from: the nearest folder above them with a weights-manifest.</summary>
    internal static string RepositoryRoot()
    {
        string? dir = AppContext.BaseDirectory;
        while (dir is not null && !Directory.Exists(Path.Combine(dir, "weights-manifest")))
        {
            dir = Path.GetDirectoryName(dir);
        }
        Assert.NotNull(dir);
        return dir;
    }
}
