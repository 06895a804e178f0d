using System.Globalization;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Input;
using Assay.Model;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

public sealed class ZeroShotTests
{
    [Fact]
    public void Accuracy_is_that_of_the_label_words_summed_next_token_probabilities()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 30);   // labels 0 … 3
        File.WriteAllLines(temp.File("v.txt"), ["# four labels", "0: lamp, rope", "1: salt", "2: bell, tower", "3: oar"]);
        var o = new StringWriter();
        string folder = Checkpoints.Folder(FeatureExtractorTests.Spec);
        Assert.Equal(0, ZeroShotCommand.Run(folder, input, temp.File("v.txt"), "{text} It is a", false, InputFormat.Auto, "text", "label", o));

        // The reference: the forward pass's own next-token distribution after each filled template.
        LanguageModel m = LanguageModel.Open(folder);
        string[][] words = [["lamp", "rope"], ["salt"], ["bell", "tower"], ["oar"]];
        int correct = 0, rows = 0;
        using (TextInputReader reader = TextInputReader.Open(input))
        {
            foreach (InputRecord r in reader.Records().Where(r => r.Accepted))
            {
                int[] suffix = m.Tokenizer.Encode(" It is a"), body = m.Tokenizer.Encode(r.Text!);
                body = body.Length > m.Config.ContextLength - suffix.Length ? body[..(m.Config.ContextLength - suffix.Length)] : body;   // keep the head
                int[] ids = [.. body, .. suffix];
                ForwardResult f = m.Forward([ids]);
                float[] p = new float[f.VocabularySize];
                f.NextTokenProbabilities(0, p);
                double[] scores = [.. words.Select(ws => ws.Sum(w => (double)p[m.Tokenizer.Encode(" " + w)[0]]))];
                correct += LinearProbe.MostLikely(scores) == int.Parse(r.Label, CultureInfo.InvariantCulture) ? 1 : 0;
                rows++;
            }
        }
        string expected = string.Create(CultureInfo.InvariantCulture, $"accuracy {(double)correct / rows:P2}");
        Assert.Contains(expected, o.ToString(), StringComparison.Ordinal);
        Assert.Contains("30 texts (2 records skipped", o.ToString(), StringComparison.Ordinal);   // the two bad lines of the input
    }

    [Theory]
    [InlineData("animal dog\nplant: tree\n", "line 1: expected \"label: word")]
    [InlineData("animal: dog\nanimal: cat\n", "line 2: label \"animal\" appears twice")]
    [InlineData("animal:\nplant: tree\n", "line 1: label \"animal\" has no words")]
    [InlineData("animal: dog\n", "a classification needs at least two")]
    public void Bad_verbalizers_name_the_line(string content, string message)
    {
        using var temp = new TempFolder();
        File.WriteAllText(temp.File("v.txt"), content);
        Assert.Contains(message, Assert.Throws<VerbalizerException>(() => Verbalizer.Load(temp.File("v.txt"))).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Multi_word_scores_sum_whole_word_probabilities()
    {
        using var temp = new TempFolder();
        File.WriteAllLines(temp.File("v.txt"), ["a: x, y", "b: z"]);
        Verbalizer v = Verbalizer.Load(temp.File("v.txt"));
        Assert.Equal(["x", "y", "z"], v.AllWords);
        double[] s = new double[2];
        v.Scores([MathF.Log(0.2f), MathF.Log(0.1f), MathF.Log(0.4f)], logLikelihoods: true, s);
        Assert.Equal(0.3, s[0], 6);
        Assert.Equal(0.4, s[1], 6);
    }
}
