using System.Security.Cryptography;
using System.Text;
using Assay.Tokenization;

namespace Assay.Trainer;

/// <summary>
/// Training text as token windows. Each non-empty line of each input file is one document; documents are encoded
/// with the GPT-2 tokenizer and each is followed by &lt;|endoftext|&gt;. A fixed 2 % of documents (by a hash of the file
/// name and line number) is held out for validation. Each split is laid end to end and cut into windows of
/// context + 1 tokens (inputs and their next tokens), stride = context.
/// </summary>
internal sealed class Corpus
{
    private Corpus(int[] train, int[] validation, int context, IReadOnlyDictionary<string, long> tokensPerFile)
    {
        Train = train;
        Validation = validation;
        Context = context;
        TokensPerFile = tokensPerFile;
    }

    public int[] Train { get; }

    public int[] Validation { get; }

    public int Context { get; }

    public IReadOnlyDictionary<string, long> TokensPerFile { get; }

    public int TrainWindows => (Train.Length - 1) / Context;

    public int ValidationWindows => (Validation.Length - 1) / Context;

    public static Corpus Load(IEnumerable<string> files, TextTokenizer tokenizer, int context)
    {
        var train = new List<int>();
        var validation = new List<int>();
        var perFile = new SortedDictionary<string, long>(StringComparer.Ordinal);
        foreach (string file in files)
        {
            string name = Path.GetFileName(file);
            long count = 0;
            int line = 0;
            foreach (string text in File.ReadLines(file, Encoding.UTF8))
            {
                line++;
                if (string.IsNullOrWhiteSpace(text))
                {
                    continue;
                }
                int[] ids = tokenizer.Encode(text.Trim());
                List<int> target = HeldOut(name, line) ? validation : train;
                target.AddRange(ids);
                target.Add(tokenizer.EndOfTextId);
                count += ids.Length + 1;
            }
            perFile[name] = count;
        }
        return new Corpus([.. train], [.. validation], context, perFile);
    }

    /// <summary>Window i of a split: tokens i·context … i·context + context (context + 1 of them).</summary>
    public ReadOnlySpan<int> Window(int[] split, int i) => split.AsSpan(i * Context, Context + 1);

    /// <summary>
    /// Cross-entropy (nats/token) on the validation split of a unigram model fitted to the training split, with add-one
    /// smoothing over the vocabulary: the baseline a language model must beat.
    /// </summary>
    public double UnigramCrossEntropy(int vocabulary)
    {
        double[] counts = new double[vocabulary];
        foreach (int id in Train)
        {
            counts[id]++;
        }
        double total = Train.Length + vocabulary;
        double sum = 0;
        int n = ValidationWindows * Context;
        for (int i = 1; i <= n; i++)
        {
            sum -= Math.Log((counts[Validation[i]] + 1) / total);
        }
        return sum / n;
    }

    private static bool HeldOut(string file, int line)
    {
        byte[] h = SHA256.HashData(Encoding.UTF8.GetBytes(file + ":" + line.ToString(System.Globalization.CultureInfo.InvariantCulture)));
        return h[0] < 5 || (h[0] == 5 && h[1] < 32);   // 5.125 / 256 ≈ 2 %
    }
}
