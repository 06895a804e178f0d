using Assay.Datasets;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tokenization;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.Trainer.Tests;

public sealed class TrainingTests
{
    private static readonly CheckpointSpec Tiny = new()
    {
        Width = 16, Layers = 1, Heads = 2, Context = 16, Vocabulary = 50257, DType = "F32", Tokenizer = TokenizerFiles.Gpt2, MaskBuffers = false,
    };

    /// <summary>Definitions from the training half of WordNet (Debian wordnet-base), as the real corpus has them.</summary>
    private static Corpus SmallCorpus(string folder)
    {
        string file = Path.Combine(folder, "glosses.txt");
        File.WriteAllLines(file, WordNetNouns.Read().Where(s => !WordNetNouns.Split(s.Offset).Evaluation).Take(400).Select(s => s.Definition));
        return Corpus.Load([file], TextTokenizer.EmbeddedGpt2(), Tiny.Context);
    }

    [Fact]
    public void One_seed_gives_the_same_losses_and_another_seed_other_losses()
    {
        string folder = Directory.CreateTempSubdirectory("assay-trainer-test").FullName;
        try
        {
            Corpus corpus = SmallCorpus(folder);
            var o = new TrainingOptions { Spec = Tiny, Steps = 6, Batch = 2, Warmup = 2, ValidationWindows = 4, KeepAt = [0.5, 1.0] };
            double[] first = Losses(corpus, o), again = Losses(corpus, o), other = Losses(corpus, o with { Seed = 2 });
            Assert.Equal(first, again);
            Assert.NotEqual(first, other);
        }
        finally
        {
            Directory.Delete(folder, recursive: true);
        }
    }

    private static double[] Losses(Corpus corpus, TrainingOptions o) =>
        [.. Training.Run(corpus, o, outFolder: null, TextWriter.Null).Select(l => l.TrainLoss)];

    [Fact]
    public void The_written_checkpoint_gives_the_engine_the_trained_model_logits()
    {
        string folder = Directory.CreateTempSubdirectory("assay-trainer-test").FullName;
        try
        {
            Corpus corpus = SmallCorpus(folder);
            torch.manual_seed(3);
            var model = new GptModel(Tiny);
            string checkpoint = SyntheticCheckpoint.Write(Tiny, model.Export(), Path.Combine(folder, "ckpt"));
            int[] window = corpus.Window(corpus.Train, 0)[..Tiny.Context].ToArray();

            float[] torchLogits;
            using (no_grad())
            {
                Tensor logits = model.Forward(tensor(window.Select(i => (long)i).ToArray(), [1, window.Length]));
                torchLogits = logits[0, ^1].contiguous().data<float>().ToArray();
            }
            LanguageModel engine = LanguageModel.Open(checkpoint);
            float[] engineLogits = engine.Forward([window]).LastLogits(0).ToArray();
            // libtorch float32 against the engine's float32: the same parameters, summed in different orders.
            double worst = torchLogits.Zip(engineLogits, (a, b) => Math.Abs(a - b)).Max();
            Assert.True(worst < 1e-4, $"max |libtorch − engine| = {worst}");
        }
        finally
        {
            Directory.Delete(folder, recursive: true);
        }
    }
}
