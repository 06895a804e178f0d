using System.Diagnostics;
using System.Globalization;
using System.IO.Compression;
using System.Security.Cryptography;
using System.Xml.Linq;
using Assay.Cli.Commands;
using Assay.Features;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Packaging;

/// <summary>
/// The folder tools/pack.sh writes (README: Packages), with a fresh, empty NuGet packages folder and a nuget.config
/// whose only source is that folder: what an air-gapped machine has after the folder is copied to it.
/// </summary>
public sealed class PackedFolder : IDisposable
{
    private readonly TempFolder _temp = new();

    public PackedFolder()
    {
        Feed = _temp.File("feed");
        Root = Tests.Model.WeightsManifestPinTests.RepositoryRoot();
        PackageTests.Run(Path.Combine(Root, "tools", "pack.sh"), [Feed], Root, this, isolated: false);
        System.IO.File.WriteAllText(_temp.File("nuget.config"),
            $"""<configuration><packageSources><clear /><add key="offline" value="{Feed}" /></packageSources></configuration>""");
    }

    public string Root { get; }

    public string Feed { get; }

    /// <summary>The nuget.config naming the folder as the only package source.</summary>
    public string Config => _temp.File("nuget.config");

    /// <summary>An empty global packages folder, so nothing cached on this machine is used.</summary>
    public string Packages => _temp.File("packages");

    public string File(string name) => _temp.File(name);

    public string Package(string id) => Path.Combine(Feed, $"{id}.0.1.0.nupkg");

    public void Dispose() => _temp.Dispose();
}

public sealed class PackageTests(PackedFolder packed) : IClassFixture<PackedFolder>
{
    private static readonly string[] Texts = ["a small boat propelled by oars", "a sudden loud noise", "the act of moving quickly"];

    [Fact]
    public void The_tool_installs_from_the_folder_alone_and_extracts_the_same_bytes_as_the_library()
    {
        string tools = packed.File("tools");
        Run("dotnet", ["tool", "install", "assay", "--tool-path", tools, "--configfile", packed.Config], packed.File("."), packed);
        string assay = Path.Combine(tools, "assay");

        string inspect = Run(assay, ["inspect"], packed.File("."), packed);
        Assert.Contains("GPT-2 (model_type gpt2): 4 layers, width 192", inspect, StringComparison.Ordinal);
        Assert.Contains(Path.Combine(tools, ".store", "assay"), inspect, StringComparison.Ordinal);

        string input = packed.File("tool-texts.txt");
        File.WriteAllLines(input, Texts);
        Run(assay, ["extract", input, "--out", packed.File("tool-run"), "--features", "hidden,cmean"], packed.File("."), packed);
        ExtractionRun.Execute(LanguageModel.Open(ModelOption.DefaultFolder), input, packed.File("library-run"), new RunOptions());
        foreach (string file in new[] { "hidden.layer4.last.npy", "cmean.npy", "rows.csv" })
        {
            Assert.Equal(File.ReadAllBytes(packed.File("library-run/" + file)), File.ReadAllBytes(packed.File("tool-run/" + file)));
        }
    }

    [Fact]
    public void The_sample_app_builds_against_the_library_packages_from_the_folder_alone()
    {
        string sample = packed.File("sample");
        Directory.CreateDirectory(sample);
        foreach (string file in new[] { "Assay.Sample.csproj", "Program.cs" })
        {
            File.Copy(Path.Combine(packed.Root, "tools", "Assay.Sample", file), Path.Combine(sample, file));
        }
        Run("dotnet", ["build", sample, "-c", "Release", "-o", Path.Combine(sample, "out"), "-nologo"], sample, packed);
        string printed = Run("dotnet", [Path.Combine(sample, "out", "Assay.Sample.dll")], sample, packed);

        // What the sample must print: the same features through the library of this build.
        LanguageModel model = LanguageModel.Open(ModelOption.DefaultFolder);
        var extractor = new FeatureExtractor(model, new ExtractionOptions
        {
            Prompt = PromptTemplate.Parse("{text} It is a kind of"),
            Features = [new HiddenStateFeature(-1), new ConditionalMeanFeature()],
        });
        string[] defaults = ["a domesticated carnivorous mammal that typically has a long snout", "a small boat propelled by oars", "a sudden loud noise"];
        foreach (FeatureRow row in extractor.Extract(defaults))
        {
            string Head(int output) => string.Join(" ", row.Values(output)[..3].ToArray().Select(v => v.ToString("F4", CultureInfo.InvariantCulture)));
            Assert.Contains($"row {row.Index}: {row.TokenCount} tokens; hidden.layer4.last {Head(0)} …; cmean {Head(1)} …", printed, StringComparison.Ordinal);
        }
        // The model came from the content package, byte for byte.
        Assert.Equal(SHA256.HashData(File.ReadAllBytes(Path.Combine(ModelOption.DefaultFolder, "model.safetensors"))),
            SHA256.HashData(File.ReadAllBytes(Path.Combine(sample, "out", "models", "assay-demo", "model.safetensors"))));
    }

    [Fact]
    public void Packages_hold_what_README_says()
    {
        // The library: MIT licence expression, its README, XML documentation, no model.
        using (ZipArchive engine = ZipFile.OpenRead(packed.Package("Assay.Engine")))
        {
            XElement metadata = Metadata(engine);
            Assert.Equal("MIT", Field(metadata, "license"));
            Assert.Equal("README.md", Field(metadata, "readme"));
            Assert.Contains(engine.Entries, e => e.FullName == "lib/net10.0/Assay.Engine.xml");
            Assert.DoesNotContain(engine.Entries, e => e.FullName.EndsWith(".safetensors", StringComparison.Ordinal));
            Assert.True(new FileInfo(packed.Package("Assay.Engine")).Length < 1 << 20, "the library package stays under 1 MiB");
        }
        // The tool: command assay, the demo model only (not the study's earlier checkpoints).
        using (ZipArchive tool = ZipFile.OpenRead(packed.Package("assay")))
        {
            Assert.Contains("Command Name=\"assay\"", Read(tool, "tools/net10.0/any/DotnetToolSettings.xml"), StringComparison.Ordinal);
            Assert.Contains(tool.Entries, e => e.FullName == "tools/net10.0/any/models/assay-demo/model.safetensors");
            Assert.DoesNotContain(tool.Entries, e => e.FullName.Contains("assay-demo-", StringComparison.Ordinal));
            Assert.Contains(tool.Entries, e => e.FullName.StartsWith("tools/net10.0/any/runtimes/linux-x64/native/", StringComparison.Ordinal));
            Assert.DoesNotContain(tool.Entries, e => e.FullName.StartsWith("tools/net10.0/any/runtimes/linux-musl-x64/", StringComparison.Ordinal));
        }
        // The content package: the four files of the demo model, copied to the output.
        using (ZipArchive demo = ZipFile.OpenRead(packed.Package("Assay.DemoModel")))
        {
            Assert.Equal(Directory.GetFiles(ModelOption.DefaultFolder).Select(Path.GetFileName).Order(StringComparer.Ordinal),
                demo.Entries.Where(e => e.FullName.StartsWith("contentFiles/any/any/models/assay-demo/", StringComparison.Ordinal)).Select(e => e.Name).Order(StringComparer.Ordinal));
            Assert.Contains("copyToOutput=\"true\"", Metadata(demo).ToString(), StringComparison.Ordinal);
            Assert.DoesNotContain(demo.Entries, e => e.FullName.StartsWith("lib/", StringComparison.Ordinal));
        }
    }

    private static XElement Metadata(ZipArchive package)
    {
        ZipArchiveEntry nuspec = package.Entries.Single(e => e.FullName.EndsWith(".nuspec", StringComparison.Ordinal));
        using Stream s = nuspec.Open();
        return XDocument.Load(s).Root!.Elements().Single(e => e.Name.LocalName == "metadata");
    }

    private static string? Field(XElement metadata, string name) => metadata.Elements().SingleOrDefault(e => e.Name.LocalName == name)?.Value;

    private static string Read(ZipArchive package, string entry)
    {
        using var reader = new StreamReader(package.GetEntry(entry)!.Open());
        return reader.ReadToEnd();
    }

    private static string Run(string file, string[] args, string directory, PackedFolder packed) => Run(file, args, directory, packed, isolated: true);

    /// <summary>Runs a program to its end (<see cref="ChildProcess.Run"/>); isolated runs get the empty packages folder.</summary>
    internal static string Run(string file, string[] args, string directory, PackedFolder packed, bool isolated) =>
        ChildProcess.Run(file, args, directory, isolated ? new Dictionary<string, string> { ["NUGET_PACKAGES"] = packed.Packages } : null);
}
