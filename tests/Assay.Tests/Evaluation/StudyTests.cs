using System.Buffers.Binary;
using System.Globalization;
using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Tests.Model;
using Assay.Tests.Support;
using CsvHelper;

namespace Assay.Tests.Evaluation;

/// <summary>
/// One small study on the bundled checkpoints and the WordNet supersense task, run once through <c>assay study</c>:
/// the initialization (the trainer's step 0 of the same recipe), the 25 % checkpoint and the final model, prompt
/// "{text} It is a kind of", features hidden, cmean and zero-shot; every 16th training and every 8th test text of each
/// label; C = 0.1 by 3 folds (one strength, to keep the run short).
/// </summary>
public sealed class StudyFixture : IDisposable
{
    private readonly TempFolder _temp = new();

    public StudyFixture()
    {
        string repository = Path.GetDirectoryName(WeightsManifestPinTests.RepositoryManifest())!;
        string cli = Path.Combine(repository, "src", "Assay.Cli");
        SpecFile = _temp.File("study.json");
        File.WriteAllText(SpecFile, $$"""
            {
              "train": "{{Path.Combine(cli, "tasks", "wordnet-supersense", "train.jsonl")}}",
              "test": "{{Path.Combine(cli, "tasks", "wordnet-supersense", "test.jsonl")}}",
              "train_every": 16,
              "test_every": 8,
              "models": {
                "init": "{{Path.Combine(cli, "models", "assay-demo-init")}}",
                "25pct": "{{Path.Combine(cli, "models", "assay-demo-25pct")}}",
                "final": "{{Path.Combine(cli, "models", "assay-demo")}}"
              },
              "prompts": { "kind-of": "{text} It is a kind of" },
              "features": ["hidden", "cmean", "zero-shot"],
              "verbalizer": "{{Path.Combine(cli, "studies", "wordnet-supersense.verbalizer.txt")}}",
              "folds": 3,
              "strengths": [0.1],
              "compare": [["hidden", "cmean"], ["cmean", "zero-shot"]]
            }
            """);
        Folder = _temp.File("out");
        var stdout = new StringWriter();
        Assert.Equal(0, StudyCommand.Run(SpecFile, Folder, overwrite: false, stdout, TextWriter.Null));
        Printed = stdout.ToString();
    }

    public string SpecFile { get; }

    public string Folder { get; }

    public string Printed { get; }

    /// <summary>The study again: everything is in the folder, so this reads the cells back.</summary>
    public StudyResult Rerun() => Study.Run(StudySpec.Load(SpecFile), Folder);

    public void Dispose() => _temp.Dispose();
}

public sealed class StudyTests(StudyFixture study) : IClassFixture<StudyFixture>
{
    private static StudyCell Cell(StudyResult r, string model, string feature) => r.Cells.Single(c => c.Model == model && c.Feature == feature);

    [Fact]
    public void Trained_features_beat_the_random_initialization_by_a_clear_margin()
    {
        // Measured here (one run on the shuffled task files; 2,104 train / 1,068 test rows; chance 3.8 %, majority class
        // 14.5 %): init hidden 30.5 %, cmean 30.8 %; final hidden 48.0 %, cmean 43.2 %: gaps of 17.5 and 12.4 points. Threshold: 8 points,
        // about two thirds of the smaller gap and well outside the intervals' ±3 points. The published qualitative
        // finding (random-init features near chance) does not hold at this size: a random network's last state still
        // mixes the text's random token embeddings, which a probe can read (README, study section).
        StudyResult r = study.Rerun();
        foreach (string feature in new[] { "hidden", "cmean" })
        {
            StudyCell init = Cell(r, "init", feature), final = Cell(r, "final", feature);
            Assert.True(final.Score.Accuracy - init.Score.Accuracy >= 0.08, $"{feature}: final {final.Score.Accuracy:P1}, init {init.Score.Accuracy:P1}");
            // Log loss: measured 2.510 → 1.783 (hidden) and 2.511 → 1.917 (cmean); threshold 0.4 nats.
            Assert.True(init.Score.LogLoss - final.Score.LogLoss >= 0.4, $"{feature}: final {final.Score.LogLoss}, init {init.Score.LogLoss}");
            // Both beat the label prior (2.796 nats): the final model by 0.87 nats or more (threshold 0.5).
            Assert.True(final.Score.LogLoss <= r.Prior.LogLoss - 0.5, $"{feature}: log loss {final.Score.LogLoss}, prior {r.Prior.LogLoss}");
        }
    }

    [Fact]
    public void Conditional_mean_features_come_close_to_the_final_hidden_state()
    {
        // Measured gap on the final model (same run): hidden 48.0 % − cmean 43.2 % = 4.8 points (the README study,
        // twice the rows: 50.2 − 46.4 = 3.8). Bound: 8 points, the measured gap plus the intervals' ±3.
        StudyResult r = study.Rerun();
        double hidden = Cell(r, "final", "hidden").Score.Accuracy, cmean = Cell(r, "final", "cmean").Score.Accuracy;
        Assert.True(Math.Abs(hidden - cmean) <= 0.08, $"hidden {hidden:P1}, cmean {cmean:P1}");
    }

    [Fact]
    public void Cross_entropy_falls_across_the_checkpoints_and_the_initialization_is_near_uniform()
    {
        StudyResult r = study.Rerun();
        double[] ce = [.. r.Models.Select(m => m.CrossEntropy.NatsPerToken)];
        Assert.True(ce[0] > ce[1] && ce[1] > ce[2], string.Join(", ", ce));
        // A model at initialization predicts close to uniformly: ln 50257 = 10.825 nats (common practice); measured
        // 10.887 here. Bound ± 0.3.
        Assert.True(Math.Abs(ce[0] - Math.Log(50257)) < 0.3, $"init {ce[0]}");
    }

    [Fact]
    public void The_report_files_hold_the_cells()
    {
        StudyResult r = study.Rerun();
        Assert.Equal(3 * 3, r.Cells.Count);
        string md = File.ReadAllText(Path.Combine(study.Folder, StudyFolder.MarkdownFile));
        Assert.Equal(md.TrimEnd(), study.Printed[..md.Length].TrimEnd());
        StudyCell final = Cell(r, "final", "hidden");
        Assert.Contains(string.Create(CultureInfo.InvariantCulture, $"| final | {r.Models[2].CrossEntropy.NatsPerToken:F3} | kind-of | {final.Score.Accuracy * 100:F1} ("), md, StringComparison.Ordinal);
        // One fitted curve per probed feature (zero-shot is not a probe).
        Assert.Equal(["hidden", "cmean"], r.Curves.Select(c => c.Feature));
        Assert.Contains("| kind-of | hidden |", md, StringComparison.Ordinal);

        using CsvReader csv = CsvReader.FromFile(Path.Combine(study.Folder, StudyFolder.CsvFile), new CsvReaderOptions { Separator = ',' });
        int rows = 0;
        while (csv.Read())
        {
            StudyCell c = Cell(r, csv.GetString("model"), csv.GetString("feature"));
            Assert.Equal(c.Score.Accuracy, double.Parse(csv.GetString("accuracy"), CultureInfo.InvariantCulture));
            Assert.Equal(c.Score.LogLoss, double.Parse(csv.GetString("log_loss"), CultureInfo.InvariantCulture));
            rows++;
        }
        Assert.Equal(r.Cells.Count, rows);
    }

    [Fact]
    public void Paired_comparisons_are_the_cells_differences_on_the_same_rows()
    {
        StudyResult r = study.Rerun();
        Assert.Equal(3 * 2, r.Comparisons.Count);
        StudyComparison paired = r.Comparisons.Single(c => c.Model == "final" && c.A == "hidden");
        Assert.Equal(Cell(r, "final", "hidden").Score.Accuracy - Cell(r, "final", "cmean").Score.Accuracy, paired.Result.AccuracyDifference, 12);
        Assert.Equal(Cell(r, "final", "cmean").Score.LogLoss - Cell(r, "final", "zero-shot").Score.LogLoss,
            r.Comparisons.Single(c => c.Model == "final" && c.B == "zero-shot").Result.LogLossDifference, 9);
        string md = File.ReadAllText(Path.Combine(study.Folder, StudyFolder.MarkdownFile));
        Assert.Contains("| final | kind-of | hidden | cmean |", md, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("accuracy.kind-of.png", 1000, 520)]
    [InlineData("loss-vs-cross-entropy.kind-of.png", 1000, 560)]
    public void The_plots_are_png_images(string name, int width, int height)
    {
        byte[] png = File.ReadAllBytes(Path.Combine(study.Folder, name));
        // PNG signature and the IHDR chunk's width and height (the PNG specification, ISO/IEC 15948).
        Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A }, png[..8]);
        Assert.Equal("IHDR", System.Text.Encoding.ASCII.GetString(png, 12, 4));
        Assert.Equal(width, BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(16)));
        Assert.Equal(height, BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(20)));
        Assert.True(png.Length > 10_000, $"{name}: {png.Length} bytes");
    }

    [Fact]
    public async Task The_html_report_is_self_contained_and_renders_in_headless_chromium()
    {
        string page = Path.Combine(study.Folder, StudyFolder.HtmlFile);
        string html = File.ReadAllText(page);
        StudyResult r = study.Rerun();
        // What it must hold: the tables, every model's file hashes, the study file, the plots inline.
        Assert.Contains(string.Create(CultureInfo.InvariantCulture, $"<td class=\"n\">{r.Models[2].CrossEntropy.NatsPerToken:F3}</td>"), html, StringComparison.Ordinal);
        foreach (Assay.Model.ModelFile f in Assay.Model.ModelFile.Describe(r.Models[0].Folder))
        {
            Assert.Contains(f.Sha256, html, StringComparison.Ordinal);
        }
        Assert.Contains("&quot;train_every&quot;: 16", html, StringComparison.Ordinal);
        // Paths relative to the study file, none rooted: the page says nothing of the folder it was made in.
        Assert.Contains($"<code>{System.Net.WebUtility.HtmlEncode(Path.GetRelativePath(Path.GetDirectoryName(study.SpecFile)!, r.Models[0].Folder))}</code>", html, StringComparison.Ordinal);
        Assert.DoesNotContain("&quot;/", html, StringComparison.Ordinal);
        Assert.DoesNotContain("<code>/", html, StringComparison.Ordinal);
        Assert.Equal(2, System.Text.RegularExpressions.Regex.Count(html, "src=\"data:image/png;base64,"));
        // Nothing outside the page: every src and href is a data: URI.
        Assert.DoesNotMatch(@"(src|href)\s*=\s*[""'](?!data:)", html);

        // Rendered by Debian's headless Chromium (package chromium-headless-shell) with name resolution off and every
        // request logged: the net log holds no request, and the screenshot is not blank.
        const string chromium = "/usr/bin/chromium-headless-shell";
        Assert.True(File.Exists(chromium), $"{chromium} is missing: apt-get install chromium-headless-shell (tools/test.sh does)");
        using var temp = new TempFolder();
        var psi = new System.Diagnostics.ProcessStartInfo(chromium) { RedirectStandardOutput = true, RedirectStandardError = true };
        foreach (string a in new[] { "--no-sandbox", "--disable-gpu", "--hide-scrollbars", $"--user-data-dir={temp.File("profile")}", "--window-size=1100,1400",
            $"--screenshot={temp.File("shot.png")}", $"--log-net-log={temp.File("net.json")}", "--host-resolver-rules=MAP * ~NOTFOUND", new Uri(page).AbsoluteUri })
        {
            psi.ArgumentList.Add(a);
        }
        using (var p = System.Diagnostics.Process.Start(psi)!)
        {
            Task<string> stderr = p.StandardError.ReadToEndAsync();
            Task<string> stdout = p.StandardOutput.ReadToEndAsync();
            using var limit = new CancellationTokenSource(TimeSpan.FromMinutes(2));
            await p.WaitForExitAsync(limit.Token);
            await stdout;
            Assert.True(p.ExitCode == 0, $"chromium exited with {p.ExitCode}: {await stderr}");
        }
        using (JsonDocument net = JsonDocument.Parse(File.ReadAllBytes(temp.File("net.json"))))
        {
            string[] requests = [.. net.RootElement.GetProperty("events").EnumerateArray()
                .Where(e => e.TryGetProperty("params", out JsonElement ps) && ps.ValueKind == JsonValueKind.Object && ps.TryGetProperty("url", out _))
                .Select(e => e.GetProperty("params").GetProperty("url").GetString()!)
                .Where(u => !u.StartsWith("file:", StringComparison.Ordinal) && !u.StartsWith("data:", StringComparison.Ordinal))];
            Assert.Empty(requests);
        }
        using SkiaSharp.SKBitmap shot = SkiaSharp.SKBitmap.Decode(temp.File("shot.png"));
        Assert.Equal((1100, 1400), (shot.Width, shot.Height));
        int inked = 0;
        var colours = new HashSet<uint>();
        for (int y = 0; y < shot.Height; y += 4)
        {
            for (int x = 0; x < shot.Width; x += 4)
            {
                SkiaSharp.SKColor c = shot.GetPixel(x, y);
                inked += c.Red + c.Green + c.Blue < 600 ? 1 : 0;
                colours.Add((uint)c);
            }
        }
        // Text, table rules and a plot: measured about 6 % of the sampled pixels dark and dozens of colours.
        Assert.True(inked > shot.Width * shot.Height / 16 / 100 && colours.Count > 10, $"{inked} dark samples, {colours.Count} colours");
    }

    [Fact]
    public void Zero_shot_cells_equal_the_zero_shot_command()
    {
        StudyResult r = study.Rerun();
        var o = new StringWriter();
        string runTest = Path.Combine(study.Folder, "data", "test.jsonl");
        Assert.Equal(0, ZeroShotCommand.Run(r.Models[2].Folder, runTest, r.Spec.Verbalizer!, "{text} It is a kind of", false, Assay.Input.InputFormat.JsonLines, "text", "label", o));
        Assert.Contains(string.Create(CultureInfo.InvariantCulture, $"accuracy {Cell(r, "final", "zero-shot").Score.Accuracy:P2}"), o.ToString(), StringComparison.Ordinal);
    }

    [Fact]
    public void A_folder_of_another_study_is_refused_and_names_the_difference()
    {
        string other = Path.Combine(Path.GetDirectoryName(study.SpecFile)!, "other.json");
        File.WriteAllText(other, File.ReadAllText(study.SpecFile).Replace("\"test_every\": 8", "\"test_every\": 9", StringComparison.Ordinal));
        var e = Assert.Throws<StudyException>(() => Study.Run(StudySpec.Load(other), study.Folder));
        Assert.Contains("different test every", e.Message, StringComparison.Ordinal);
    }
}
