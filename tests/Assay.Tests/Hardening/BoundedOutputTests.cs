using Assay.Cli.Commands;
using Assay.Fixtures;
using Assay.Tests.Features;
using Assay.Tests.Support;
using Assay.Tokenization;

namespace Assay.Tests.Hardening;

/// <summary>A huge value in a file (a tensor name, a merges line) is shown cut with its length, never whole.</summary>
public sealed class BoundedOutputTests
{
    [Fact]
    public void Echo_keeps_short_values_and_cuts_long_ones_with_their_length()
    {
        Assert.Equal("wte.weight", Echo.Of("wte.weight"));
        string cut = Echo.Of(new string('n', 30_000_000));
        Assert.Equal(new string('n', 200) + "… (30,000,000 characters)", cut);
        // A surrogate pair is never split.
        Assert.Equal(new string('a', 199) + "… (201 characters)", Echo.Of(new string('a', 199) + "🙂"));
    }

    [Fact]
    public void Inspect_of_a_checkpoint_with_a_one_mebibyte_tensor_name_prints_a_few_kilobytes()
    {
        using var temp = new TempFolder();
        string name = new('t', 1 << 20);
        string folder = SyntheticCheckpoint.Write(FeatureExtractorTests.Spec,
            SyntheticCheckpoint.Parameters(FeatureExtractorTests.Spec).Append(new StoredParameter(name, [2], [1f, 2f])), temp.File("model"));
        var o = new StringWriter();
        InspectCommand.Run(folder, o);
        string text = o.ToString();
        Assert.True(text.Length < 20_000, $"{text.Length:N0} characters");
        Assert.Contains("… (1,048,576 characters)", text, StringComparison.Ordinal);
        // Every other row keeps the column width of the longest shown name (80), not of the long one.
        Assert.All(text.Split('\n').Where(l => l.StartsWith("  h.0.", StringComparison.Ordinal)), l => Assert.True(l.Length < 160, l));
    }

    [Fact]
    public void A_two_mebibyte_merges_line_is_echoed_cut()
    {
        using var temp = new TempFolder();
        string folder = temp.File("tok");
        Directory.CreateDirectory(folder);
        Gpt2TokenizerFiles.Write(folder);
        File.AppendAllText(Path.Combine(folder, "merges.txt"), new string('m', 2 << 20) + "\n");
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(folder));
        Assert.True(e.Message.Length < 1000, $"{e.Message.Length:N0} characters");
        Assert.Contains("(2,097,152 characters)", e.Message, StringComparison.Ordinal);
    }
}
