using System.Text;
using Assay.Model;

namespace Assay.Evaluation;

/// <summary>A model's cross-entropy on a corpus: nats per token, bits per UTF-8 byte, perplexity.</summary>
/// <param name="Texts">Texts scored.</param>
/// <param name="Tokens">Tokens predicted (each text's tokens; the start token before each text is context only).</param>
/// <param name="Bytes">UTF-8 bytes of the texts.</param>
/// <param name="Nats">Total −log p over the predicted tokens, natural log.</param>
/// <param name="TokensRun">Tokens run through the model: the predicted ones, each text's end-of-text context token and
/// the context that overlapping windows run again (what the progress line counts).</param>
public sealed record CrossEntropyResult(long Texts, long Tokens, long Bytes, double Nats, long TokensRun)
{
    /// <summary>Mean nats per token.</summary>
    public double NatsPerToken => Nats / Tokens;

    /// <summary>Total bits over total UTF-8 bytes, comparable across tokenizers.</summary>
    public double BitsPerByte => Nats / Math.Log(2) / Bytes;

    /// <summary>exp(nats per token).</summary>
    public double Perplexity => Math.Exp(NatsPerToken);
}

/// <summary>
/// Scores texts under a model. Each text is preceded by the beginning-of-sequence token where the policy adds one
/// (Llama-style checkpoints), else by the end-of-text token (so its first token is predicted too, as documents follow
/// one another in GPT-2-style training), and scored alone. A text longer than the context is
/// scored in windows of the context length that start every <c>stride</c> tokens (a window starts earlier when it
/// must, so the first token it scores has at least one token of context); each token is scored once, in the first
/// window that reaches it, with the context that window gives (common practice for strided perplexity: a smaller stride
/// gives each token more context and costs more passes).
/// </summary>
public static class CrossEntropy
{
    /// <param name="model">The model.</param>
    /// <param name="texts">The texts, each scored alone.</param>
    /// <param name="stride">Tokens from one window's start to the next for texts longer than the context (default: the context length).</param>
    /// <param name="maxThreads">At most this many workers (0: all cores); results do not depend on it.</param>
    /// <param name="progress">Told after each text: texts scored, tokens run through the model, time since the start.</param>
    /// <param name="bos">Whether texts start with the beginning-of-sequence token (else the end-of-text token).</param>
    /// <exception cref="ArgumentException">The stride is not in 1 … context length.</exception>
    public static CrossEntropyResult Score(LanguageModel model, IEnumerable<string> texts, int? stride = null, int maxThreads = 0,
        IProgress<Features.ExtractionProgress>? progress = null, Tokenization.BeginningOfSequence bos = Tokenization.BeginningOfSequence.Auto)
    {
        ArgumentNullException.ThrowIfNull(model);
        ArgumentNullException.ThrowIfNull(texts);
        int context = model.Config.ContextLength;
        int step = stride ?? context;
        if (step < 1 || step > context)
        {
            throw new ArgumentException($"stride {step}: expected 1 … {context} (the context length)", nameof(stride));
        }
        int[] start = model.Tokenizer.SequenceStart(bos);
        int first = start.Length == 1 ? start[0] : model.Tokenizer.EndOfTextId;
        long count = 0, tokens = 0, bytes = 0, run = 0;
        var clock = System.Diagnostics.Stopwatch.StartNew();
        double nats = 0;
        foreach (string text in texts)
        {
            int[] ids = [first, .. model.Tokenizer.Encode(text)];
            count++;
            bytes += Encoding.UTF8.GetByteCount(text);
            int scoredUpTo = 1;   // targets before this index are scored
            for (int begin = 0; scoredUpTo < ids.Length; begin = Math.Min(begin + step, scoredUpTo - 1))
            {
                int end = Math.Min(begin + context, ids.Length);
                ForwardResult r = model.Forward([ids[begin..end]], new ForwardOptions { Logits = LogitPositions.All, MaxThreads = maxThreads });
                run += end - begin;
                for (int target = Math.Max(begin + 1, scoredUpTo); target < end; target++)
                {
                    nats -= r.LogProbability(0, target - 1 - begin, ids[target]);
                    tokens++;
                }
                scoredUpTo = end;
            }
            progress?.Report(new Features.ExtractionProgress(count, run, clock.Elapsed));
        }
        return new CrossEntropyResult(count, tokens, bytes, nats, run);
    }
}
