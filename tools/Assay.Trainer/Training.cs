using System.Globalization;
using Assay.Fixtures;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.Trainer;

/// <summary>The recipe: architecture, steps, batch, learning-rate schedule, seed, and when to keep checkpoints.</summary>
internal sealed record TrainingOptions
{
    public required CheckpointSpec Spec { get; init; }

    public int Steps { get; init; } = 1000;

    /// <summary>Windows of context + 1 tokens per step.</summary>
    public int Batch { get; init; } = 16;

    public double PeakLearningRate { get; init; } = 1e-3;

    /// <summary>Linear warm-up steps, then cosine decay to a tenth of the peak (common practice).</summary>
    public int Warmup { get; init; } = 100;

    public ulong Seed { get; init; } = 1;

    public int Threads { get; init; } = 2;

    /// <summary>Validation windows evaluated at each checkpoint (all of them when fewer).</summary>
    public int ValidationWindows { get; init; } = 400;

    /// <summary>
    /// Fractions of the steps after which a checkpoint is written and validated; 0 is the initialization itself,
    /// before the first step (the random-init baseline of the study).
    /// </summary>
    public IReadOnlyList<double> KeepAt { get; init; } = [0, 0.05, 0.25, 1.0];
}

/// <summary>One line of the training log.</summary>
internal sealed record LogLine(int Step, double LearningRate, double TrainLoss, double? ValidationLoss);

/// <summary>AdamW on next-token cross-entropy over shuffled windows, with fixed seeds for weights and data order.</summary>
internal static class Training
{
    public static IReadOnlyList<LogLine> Run(Corpus corpus, TrainingOptions o, string? outFolder, TextWriter log)
    {
        torch.set_num_threads(o.Threads);
        torch.manual_seed((long)o.Seed);
        var model = new GptModel(o.Spec);
        var optimizer = torch.optim.AdamW(model.Parameters, o.PeakLearningRate, 0.9, 0.95, 1e-8, 0.01);
        var rng = new DeterministicRandom(o.Seed);
        int[] order = Shuffled(corpus.TrainWindows, ref rng);
        int next = 0;
        var keepSteps = o.KeepAt.Select(f => f == 0 ? 0 : Math.Max(1, (int)Math.Round(f * o.Steps))).ToHashSet();
        var lines = new List<LogLine>();
        log.WriteLine("step,seconds,learning_rate,train_loss,validation_loss");
        var clock = System.Diagnostics.Stopwatch.StartNew();
        if (keepSteps.Contains(0))
        {
            double initial = Keep(model, corpus, o, outFolder, 0);
            lines.Add(new LogLine(0, 0, double.NaN, initial));
            log.WriteLine(string.Create(CultureInfo.InvariantCulture, $"0,{clock.Elapsed.TotalSeconds:F1},0,,{initial:F5}"));
        }

        for (int step = 1; step <= o.Steps; step++)
        {
            using var scope = torch.NewDisposeScope();
            double lr = LearningRate(o, step);
            foreach (var group in optimizer.ParamGroups)
            {
                group.LearningRate = lr;
            }
            long[] batch = new long[o.Batch * (corpus.Context + 1)];
            for (int b = 0; b < o.Batch; b++)
            {
                if (next == order.Length)
                {
                    order = Shuffled(corpus.TrainWindows, ref rng);
                    next = 0;
                }
                ReadOnlySpan<int> w = corpus.Window(corpus.Train, order[next++]);
                for (int t = 0; t < w.Length; t++)
                {
                    batch[(b * (corpus.Context + 1)) + t] = w[t];
                }
            }
            Tensor windows = tensor(batch, [o.Batch, corpus.Context + 1]);
            optimizer.zero_grad();
            Tensor loss = model.Loss(windows);
            loss.backward();
            nn.utils.clip_grad_norm_(model.Parameters, 1.0);
            optimizer.step();
            double trainLoss = loss.item<float>();

            double? validation = null;
            if (keepSteps.Contains(step))
            {
                validation = Keep(model, corpus, o, outFolder, step);
            }
            var line = new LogLine(step, lr, trainLoss, validation);
            lines.Add(line);
            if (step % 10 == 0 || validation != null || step == 1)
            {
                log.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{step},{clock.Elapsed.TotalSeconds:F1},{lr:G6},{trainLoss:F5},{(validation is double v ? v.ToString("F5", CultureInfo.InvariantCulture) : "")}"));
                log.Flush();
            }
        }
        return lines;
    }

    /// <summary>Validates the model and, given a folder, writes it as the checkpoint of this step.</summary>
    private static double Keep(GptModel model, Corpus corpus, TrainingOptions o, string? outFolder, int step)
    {
        double validation = Validate(model, corpus, o);
        if (outFolder != null)
        {
            string folder = Path.Combine(outFolder, string.Create(CultureInfo.InvariantCulture, $"step-{step:D6}"));
            SyntheticCheckpoint.Write(o.Spec, model.Export(), folder);
        }
        return validation;
    }

    private static double LearningRate(TrainingOptions o, int step)
    {
        if (step <= o.Warmup)
        {
            return o.PeakLearningRate * step / o.Warmup;
        }
        double progress = (double)(step - o.Warmup) / Math.Max(1, o.Steps - o.Warmup);
        double floor = o.PeakLearningRate / 10;
        return floor + ((o.PeakLearningRate - floor) * 0.5 * (1 + Math.Cos(Math.PI * progress)));
    }

    /// <summary>Mean cross-entropy (nats/token) over the first validation windows.</summary>
    private static double Validate(GptModel model, Corpus corpus, TrainingOptions o)
    {
        using var noGrad = no_grad();
        int windows = Math.Min(o.ValidationWindows, corpus.ValidationWindows);
        double sum = 0;
        for (int first = 0; first < windows; first += o.Batch)
        {
            using var scope = torch.NewDisposeScope();
            int n = Math.Min(o.Batch, windows - first);
            long[] batch = new long[n * (corpus.Context + 1)];
            for (int b = 0; b < n; b++)
            {
                ReadOnlySpan<int> w = corpus.Window(corpus.Validation, first + b);
                for (int t = 0; t < w.Length; t++)
                {
                    batch[(b * (corpus.Context + 1)) + t] = w[t];
                }
            }
            sum += model.Loss(tensor(batch, [n, corpus.Context + 1])).item<float>() * n;
        }
        return sum / windows;
    }

    private static int[] Shuffled(int count, ref DeterministicRandom rng)
    {
        int[] order = [.. Enumerable.Range(0, count)];
        for (int i = count - 1; i > 0; i--)
        {
            int j = (int)(rng.NextUInt64() % (ulong)(i + 1));
            (order[i], order[j]) = (order[j], order[i]);
        }
        return order;
    }
}
