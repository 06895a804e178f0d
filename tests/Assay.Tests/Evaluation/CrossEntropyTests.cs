using System.Text.Json;
using Assay.Evaluation;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

public sealed class CrossEntropyTests
{
    private static readonly CheckpointSpec Spec = new() { Width = 32, Heads = 4, Layers = 2, Context = 16, Vocabulary = 300 };

    private static readonly string[] Texts = ["a lamp that guides ships at night", "salt", "ropes, nets and the tides of the bay"];

    [Fact]
    public void Matches_numpy_on_the_same_logits()
    {
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(Spec));
        string[] shortTexts = ["a lamp", "salt", "ropes and nets"];   // each fits in one window
        CrossEntropyResult r = CrossEntropy.Score(m, shortTexts);

        var logits = new List<float>();
        var targets = new List<double>();
        foreach (string text in shortTexts)
        {
            int[] ids = [m.Tokenizer.EndOfTextId, .. m.Tokenizer.Encode(text)];
            ForwardResult f = m.Forward([ids], new ForwardOptions { Logits = LogitPositions.All });
            for (int t = 0; t + 1 < ids.Length; t++)
            {
                logits.AddRange(f.Logits(0, t).ToArray());
                targets.Add(ids[t + 1]);
            }
        }
        using var temp = new TempFolder();
        Npy.WriteFloat64(temp.File("logits.npy"), [.. logits.Select(v => (double)v)], Spec.Vocabulary);
        Npy.WriteFloat64(temp.File("targets.npy"), [.. targets], 1);
        using JsonDocument numpy = JsonDocument.Parse(PythonReference.Run("cross_entropy_numpy.py", temp.File("logits.npy"), temp.File("targets.npy")));
        Assert.Equal(numpy.RootElement.GetProperty("tokens").GetInt64(), r.Tokens);
        Assert.Equal(numpy.RootElement.GetProperty("nats").GetDouble(), r.Nats, 9);
        Assert.Equal(shortTexts.Sum(t => System.Text.Encoding.UTF8.GetByteCount(t)), r.Bytes);
        // One window per short text: the predicted tokens and the end-of-text token before each.
        Assert.Equal(r.Tokens + r.Texts, r.TokensRun);
        Assert.Equal(r.Nats / r.Tokens, r.NatsPerToken);
        Assert.Equal(r.NatsPerToken / Math.Log(2) * r.Tokens / r.Bytes, r.BitsPerByte, 12);
    }

    [Fact]
    public void A_uniform_model_scores_ln_V_per_token_whatever_the_stride()
    {
        // All-zero weights make every logit 0: the uniform distribution over V = 300 tokens (ln 300 = 5.70378 nats).
        using var temp = new TempFolder();
        string folder = SyntheticCheckpoint.Write(Spec, SyntheticCheckpoint.Parameters(Spec).Select(p => p with { Values = new float[p.Values.Length] }), temp.File("uniform"));
        LanguageModel m = LanguageModel.Open(folder);
        string longText = string.Concat(Enumerable.Repeat("the keeper of the light ", 6));
        int tokens = m.Tokenizer.Encode(longText).Length;
        Assert.True(tokens > 3 * Spec.Context);
        foreach (int? stride in new int?[] { null, 1, 5, Spec.Context })
        {
            CrossEntropyResult r = CrossEntropy.Score(m, [longText, .. Texts], stride);
            Assert.Equal(Math.Log(300), r.NatsPerToken, 9);
            // Every token of every text is scored exactly once.
            Assert.Equal(tokens + Texts.Sum(t => m.Tokenizer.Encode(t).Length), r.Tokens);
            // Windows after the first run at least one token of context again.
            Assert.True(r.TokensRun > r.Tokens + r.Texts);
        }
    }

    [Fact]
    public void A_smaller_stride_gives_long_texts_more_context_and_never_scores_a_token_twice()
    {
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(Spec));
        string longText = string.Concat(Enumerable.Repeat("the keeper of the light ", 6));
        CrossEntropyResult wide = CrossEntropy.Score(m, [longText], Spec.Context), narrow = CrossEntropy.Score(m, [longText], 4);
        Assert.Equal(wide.Tokens, narrow.Tokens);
        Assert.NotEqual(wide.Nats, narrow.Nats);
        Assert.Throws<ArgumentException>(() => CrossEntropy.Score(m, Texts, 0));
        Assert.Throws<ArgumentException>(() => CrossEntropy.Score(m, Texts, Spec.Context + 1));
    }

    [Fact]
    public void The_command_reports_the_scorer_figures()
    {
        using var temp = new TempFolder();
        File.WriteAllLines(temp.File("texts.txt"), [.. Texts, ""]);
        var o = new StringWriter();
        Assert.Equal(0, Assay.Cli.Commands.CrossEntropyCommand.Run(Checkpoints.Folder(Spec), temp.File("texts.txt"), null, Assay.Input.InputFormat.Auto, "text", o));
        CrossEntropyResult r = CrossEntropy.Score(LanguageModel.Open(Checkpoints.Folder(Spec)), Texts);
        string text = o.ToString();
        Assert.Contains("texts          3 scored (1 rejected records skipped)", text, StringComparison.Ordinal);
        Assert.Contains(r.NatsPerToken.ToString("F4", System.Globalization.CultureInfo.InvariantCulture) + " nats/token", text, StringComparison.Ordinal);
    }
}
