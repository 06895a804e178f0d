using System.Diagnostics;
using System.Security.Cryptography;
using Assay.Cli.Commands;
using Assay.Input;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Cli;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;
using Mono.Unix.Native;

namespace Assay.Tests.Hardening;

/// <summary>
/// Files that are not regular files — real FIFOs, /dev/zero, folders, symbolic link loops — are refused before they are
/// opened, naming the file; text input from a pipe (a FIFO or standard input) is read once, as it comes.
/// </summary>
public sealed class SpecialFileTests
{
    /// <summary>Anything that would block on a FIFO fails the test after this long instead of hanging the run.</summary>
    private static readonly TimeSpan Bound = TimeSpan.FromSeconds(30);

    private static string CopyModel(TempFolder temp, string name = "model")
    {
        string folder = temp.File(name);
        Directory.CreateDirectory(folder);
        foreach (string f in Directory.GetFiles(Checkpoints.Folder(FeatureExtractorTests.Spec)))
        {
            File.Copy(f, Path.Combine(folder, Path.GetFileName(f)));
        }
        return folder;
    }

    private static void MakeFifo(string path)
    {
        File.Delete(path);
        Assert.Equal(0, Syscall.mkfifo(path, FilePermissions.S_IRUSR | FilePermissions.S_IWUSR));
    }

    [Theory]
    [InlineData("config.json")]
    [InlineData("vocab.json")]
    [InlineData("merges.txt")]
    [InlineData("model.safetensors")]
    public async Task A_fifo_in_a_model_folder_is_refused_by_name_without_blocking(string file)
    {
        using var temp = new TempFolder();
        string folder = CopyModel(temp);
        string path = Path.Combine(folder, file);
        MakeFifo(path);
        var err = new StringWriter();
        // inspect opens every file of the folder (it hashes them too): nothing may open the FIFO.
        int code = await Task.Run(() => CommandRunner.Run(() => InspectCommand.Run(folder, TextWriter.Null), err)).WaitAsync(Bound);
        Assert.Equal(2, code);
        Assert.Equal($"assay: {path}: a FIFO (named pipe), not a regular file; the engine reads only regular files", err.ToString().TrimEnd());
    }

    [Fact]
    public async Task A_tokenizer_json_a_shard_index_and_a_words_file_as_fifos_are_refused()
    {
        using var temp = new TempFolder();
        string folder = CopyModel(temp);
        // Without vocab.json and merges.txt the loader reads tokenizer.json.
        File.Delete(Path.Combine(folder, "vocab.json"));
        File.Delete(Path.Combine(folder, "merges.txt"));
        string tokenizer = Path.Combine(folder, "tokenizer.json");
        MakeFifo(tokenizer);
        var e = await Assert.ThrowsAsync<InputFileException>(() => Task.Run(() => LanguageModel.Open(folder)).WaitAsync(Bound));
        Assert.Equal(tokenizer, e.FilePath);

        string sharded = CopyModel(temp, "sharded");
        File.Move(Path.Combine(sharded, "model.safetensors"), Path.Combine(sharded, "model-00001-of-00001.safetensors"));
        string index = Path.Combine(sharded, "model.safetensors.index.json");
        MakeFifo(index);
        e = await Assert.ThrowsAsync<InputFileException>(() => Task.Run(() => LanguageModel.Open(sharded)).WaitAsync(Bound));
        Assert.Equal(index, e.FilePath);

        string words = temp.File("words.txt");
        MakeFifo(words);
        var err = new StringWriter();
        int code = await Task.Run(() => CommandRunner.Run(() => ExtractCommand.Run(ExtractCommandTests.Request(ExtractionRunTests.WriteInput(temp, 4), temp.File("run"), "words", words: words),
            TextWriter.Null, err, CancellationToken.None), err)).WaitAsync(Bound);
        Assert.Equal(2, code);
        Assert.Contains($"{words}: a FIFO (named pipe), not a regular file", err.ToString(), StringComparison.Ordinal);
    }

    [Fact]
    public async Task Weights_linked_to_dev_zero_are_refused_by_open_and_by_manifest_verify()
    {
        using var temp = new TempFolder();
        string folder = CopyModel(temp);
        string weights = Path.Combine(folder, "model.safetensors");
        File.Delete(weights);
        File.CreateSymbolicLink(weights, "/dev/zero");
        var e = await Assert.ThrowsAsync<InputFileException>(() => Task.Run(() => LanguageModel.Open(folder)).WaitAsync(Bound));
        Assert.Equal($"{weights}: a character device, not a regular file; the engine reads only regular files", e.Message);

        // Hashing /dev/zero would never end: verify reports the link at once without reading it, and refuses a FIFO
        // in the folder by name.
        string entry = temp.File("entry.json");
        Assert.Equal(0, ManifestCommand.Pin(Checkpoints.Folder(FeatureExtractorTests.Spec), entry, "MIT", "test fixture", false, TextWriter.Null));
        var err = new StringWriter();
        int code = await Task.Run(() => CommandRunner.Run(() => ManifestCommand.Verify(folder, entry, TextWriter.Null, err), err)).WaitAsync(Bound);
        Assert.Equal(1, code);
        Assert.Contains($"assay: {weights}: a link to /dev/zero, outside the model folder", err.ToString(), StringComparison.Ordinal);
        File.Delete(weights);
        MakeFifo(weights);
        err = new StringWriter();
        code = await Task.Run(() => CommandRunner.Run(() => ManifestCommand.Verify(folder, entry, TextWriter.Null, err), err)).WaitAsync(Bound);
        Assert.Equal(2, code);
        Assert.Equal($"assay: {weights}: a FIFO (named pipe), not a regular file; the engine reads only regular files", err.ToString().TrimEnd());
    }

    [Fact]
    public void A_symbolic_link_loop_is_refused_with_its_path()
    {
        using var temp = new TempFolder();
        string folder = CopyModel(temp);
        string config = Path.Combine(folder, "config.json");
        File.Delete(config);
        File.CreateSymbolicLink(config, Path.Combine(folder, "loop.json"));
        File.CreateSymbolicLink(Path.Combine(folder, "loop.json"), config);
        var e = Assert.Throws<InputFileException>(() => LanguageModel.Open(folder));
        Assert.StartsWith($"{config}: a symbolic link loop", e.Message, StringComparison.Ordinal);

        // An input file that loops is an input problem, not an unwritable run folder.
        string input = temp.File("input.jsonl");
        File.CreateSymbolicLink(input, temp.File("other.jsonl"));
        File.CreateSymbolicLink(temp.File("other.jsonl"), input);
        var err = new StringWriter();
        Assert.Equal(2, CommandRunner.Run(() => ExtractCommand.Run(ExtractCommandTests.Request(input, temp.File("run"), "hidden"), TextWriter.Null, err, CancellationToken.None), err));
        Assert.StartsWith($"assay: {input}: a symbolic link loop", err.ToString(), StringComparison.Ordinal);
        Assert.Single(err.ToString().TrimEnd().Split('\n'));
    }

    [Fact]
    public void Manifest_verify_reports_files_linked_from_outside_the_folder_and_checks_subfolders()
    {
        using var temp = new TempFolder();
        string folder = CopyModel(temp);
        Directory.CreateDirectory(Path.Combine(folder, "extra"));
        File.WriteAllText(Path.Combine(folder, "extra", "notes.txt"), "pinned with the folder\n");
        string entry = temp.File("entry.json");
        Assay.Model.WeightsManifest.Pin(folder, entry, "MIT", "test fixture");
        Assert.Empty(Assay.Model.WeightsManifest.Verify(folder, entry));

        // A byte changed in a subfolder is a difference.
        File.WriteAllText(Path.Combine(folder, "extra", "notes.txt"), "pinned with the folder!\n");
        Assert.Contains(Assay.Model.WeightsManifest.Verify(folder, entry), l => l.StartsWith(Path.Combine(folder, "extra", "notes.txt") + ": sha256 ", StringComparison.Ordinal));
        File.WriteAllText(Path.Combine(folder, "extra", "notes.txt"), "pinned with the folder\n");

        // The same weights, linked from elsewhere: the bytes match, but they are not the folder's.
        string weights = Path.Combine(folder, "model.safetensors");
        string elsewhere = temp.File("elsewhere.safetensors");
        File.Move(weights, elsewhere);
        File.CreateSymbolicLink(weights, elsewhere);
        Assert.Equal([$"{weights}: a link to {elsewhere}, outside the model folder"], Assay.Model.WeightsManifest.Verify(folder, entry));
        var err = new StringWriter();
        Assert.Equal(1, ManifestCommand.Verify(folder, entry, TextWriter.Null, err));

        // A link inside the folder is the folder's own file; a subfolder linked from outside is reported like a file.
        File.Delete(weights);
        File.Move(elsewhere, Path.Combine(folder, "extra", "w.bin"));
        File.CreateSymbolicLink(weights, Path.Combine(folder, "extra", "w.bin"));
        Assert.Single(Assay.Model.WeightsManifest.Verify(folder, entry), l => l.Contains("extra/w.bin", StringComparison.Ordinal) || l.Contains(Path.Combine("extra", "w.bin"), StringComparison.Ordinal));
        Directory.CreateDirectory(temp.File("outside-dir"));
        Directory.CreateSymbolicLink(Path.Combine(folder, "linked"), temp.File("outside-dir"));
        Assert.Contains($"{Path.Combine(folder, "linked")}: a link to {temp.File("outside-dir")}, outside the model folder", Assay.Model.WeightsManifest.Verify(folder, entry));
        // Pinning such a folder is refused: an entry describes a folder's own files.
        Assert.Throws<Assay.Model.ManifestException>(() => Assay.Model.WeightsManifest.Pin(folder, temp.File("other.json"), "MIT", "test fixture"));
    }

    [Fact]
    public async Task Extract_reads_a_fifo_once_as_it_comes_and_records_its_size_and_hash_at_the_end()
    {
        using var temp = new TempFolder();
        string file = ExtractionRunTests.WriteInput(temp, 40);
        byte[] content = File.ReadAllBytes(file);
        var options = new RunOptions { CommitRows = 8, Extraction = new Assay.Features.ExtractionOptions { Features = [new Assay.Features.HiddenStateFeature(-1)] } };
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        ExtractionRun.Execute(m, file, temp.File("from-file"), options);

        string fifo = temp.File("pipe.jsonl");
        MakeFifo(fifo);
        Task writer = Task.Run(() => File.WriteAllBytes(fifo, content));
        var seen = new List<RunProgress>();
        await Task.Run(() => ExtractionRun.Execute(m, fifo, temp.File("from-pipe"), options, new ExtractionRunTests.SyncProgress(seen.Add))).WaitAsync(Bound);
        await writer.WaitAsync(Bound);
        Assert.All(seen, p => Assert.Null(p.InputFraction));

        RunRecord a = RunRecord.Read(temp.File("from-file")), b = RunRecord.Read(temp.File("from-pipe"));
        Assert.Equal(a.Counts, b.Counts);
        foreach (string f in a.Files.Select(f => f.File))
        {
            Assert.Equal(File.ReadAllBytes(Path.Combine(temp.File("from-file"), f)), File.ReadAllBytes(Path.Combine(temp.File("from-pipe"), f)));
        }
        var input = (System.Text.Json.Nodes.JsonObject)b.Settings["input"]!;
        Assert.Equal(content.Length, input["bytes"]!.GetValue<long>());
        // The hash taken while streaming equals the file's SHA-256 (System.Security.Cryptography).
        Assert.Equal(Convert.ToHexStringLower(SHA256.HashData(content)), input["sha256"]!.GetValue<string>());
        Assert.True(input["stream"]!.GetValue<bool>());

        // A pipe cannot be read twice: resuming from one is refused before anything is read.
        var e = Assert.Throws<ArgumentException>(() => ExtractionRun.Execute(m, fifo, temp.File("from-pipe"), options with { Resume = true }));
        Assert.Contains("is a pipe, read once", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Cross_entropy_reads_standard_input()
    {
        using var temp = new TempFolder();
        string file = ExtractionRunTests.WriteInput(temp, 20);
        string folder = Checkpoints.Folder(FeatureExtractorTests.Spec);
        var fromFile = new StringWriter();
        Assert.Equal(0, CrossEntropyCommand.Run(folder, file, null, InputFormat.Auto, "text", fromFile, json: true));

        using Process p = ExtractCommandTests.StartChild(["cross-entropy", "-", "--format", "jsonl", "--model", folder, "--json"], standardInput: true);
        Task<string> stdout = p.StandardOutput.ReadToEndAsync(), stderr = p.StandardError.ReadToEndAsync();
        await p.StandardInput.BaseStream.WriteAsync(await File.ReadAllBytesAsync(file));
        p.StandardInput.Close();
        await p.WaitForExitAsync().WaitAsync(Bound);
        Assert.True(p.ExitCode == 0, await stderr);
        Assert.Equal(fromFile.ToString().Trim(), (await stdout).Trim());
        Assert.Contains(" texts, ", await stderr, StringComparison.Ordinal);
        Assert.DoesNotContain("% of input", await stderr, StringComparison.Ordinal);
    }

    [Fact]
    public void Utf16_input_is_refused_as_utf16()
    {
        using var temp = new TempFolder();
        string input = temp.File("texts.txt");
        File.WriteAllText(input, "a lamp\nthe salt\n", new System.Text.UnicodeEncoding(bigEndian: false, byteOrderMark: true));
        var e = Assert.Throws<TextInputException>(() => TextInputReader.Open(input));
        Assert.Equal($"{input}: UTF-16 text (byte-order mark FF FE); inputs are UTF-8: convert it (e.g. iconv -f UTF-16 -t UTF-8)", e.Message);
        File.WriteAllText(input, "a,b\n", new System.Text.UnicodeEncoding(bigEndian: true, byteOrderMark: true));
        Assert.Contains("byte-order mark FE FF", Assert.Throws<TextInputException>(() => TextInputReader.Open(input)).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_folder_or_a_device_as_input_is_refused_by_name()
    {
        using var temp = new TempFolder();
        Assert.Equal($"{temp.Path}: a folder; an input is a regular file, a FIFO or - (standard input)",
            Assert.Throws<InputFileException>(() => TextInputReader.Open(temp.Path)).Message);
        Assert.StartsWith("/dev/zero: a character device", Assert.Throws<InputFileException>(() => TextInputReader.Open("/dev/zero")).Message, StringComparison.Ordinal);
    }
}
