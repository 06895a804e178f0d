using System.Globalization;
using Assay.Config;
using Assay.Kernels;
using Assay.Tokenization;
using Assay.Weights;

namespace Assay.Model;

/// <summary>
/// A decoder-only language model of one of the supported families (<see cref="ModelFamily"/>) opened from a checkpoint
/// folder (config.json, safetensors weights, tokenizer files),
/// with every parameter converted to float32 in memory (or its matrices to bfloat16, see <see cref="WeightPrecision"/>).
/// Immutable once opened: one instance can serve forward passes
/// from several threads at once.
/// </summary>
public sealed class LanguageModel
{
    private readonly ModelWeights _weights;
    private readonly Task<IReadOnlyList<ModelFile>> _files;

    private LanguageModel(string folder, ModelConfig config, TextTokenizer tokenizer, ModelWeights weights, Task<IReadOnlyList<ModelFile>> files)
    {
        Folder = folder;
        Config = config;
        Tokenizer = tokenizer;
        _weights = weights;
        _files = files;
    }

    /// <summary>
    /// The folder's files with their sizes and SHA-256 (<see cref="ModelFile.Describe"/>), hashed in the background from
    /// the moment the model was opened; the first read waits for the hashing to end.
    /// </summary>
    /// <exception cref="IOException">A file could not be read.</exception>
    public IReadOnlyList<ModelFile> Files => _files.GetAwaiter().GetResult();

    /// <summary>The output head: logits, distributions, log-probabilities and Φp from final hidden states.</summary>
    internal OutputHead Head => _weights.Head;

    /// <summary>The checkpoint folder.</summary>
    public string Folder { get; }

    /// <summary>The architecture.</summary>
    public ModelConfig Config { get; }

    /// <summary>The tokenizer of the folder (or the embedded GPT-2 encoding).</summary>
    public TextTokenizer Tokenizer { get; }

    /// <summary>The kernel path forward passes use (see <see cref="KernelSelector"/>).</summary>
    public static KernelVariant Kernels => KernelSelector.Current;

    /// <summary>The int8 path forward passes use with <see cref="WeightPrecision.Integer8"/> weights (see <see cref="KernelSelector"/>).</summary>
    public static Int8Kernel Int8Kernels => KernelSelector.CurrentInt8;

    /// <summary>How the matrices are held in memory.</summary>
    public WeightPrecision Precision => _weights.Precision;

    /// <summary>Bytes the converted parameters take in memory.</summary>
    public long WeightBytes => _weights.Bytes;

    /// <summary>The <see cref="WeightBytes"/> a model of <paramref name="config"/> takes when opened in <paramref name="precision"/>, computed without opening it.</summary>
    public static long WeightBytesFor(ModelConfig config, WeightPrecision precision)
    {
        ArgumentNullException.ThrowIfNull(config);
        return CheckpointLayout.For(config).WeightBytes(config, precision);
    }

    /// <summary>
    /// The dtypes the checkpoint stores its matrix parameters in (every parameter of two or more dimensions the config's
    /// family names, found under any prefix such as transformer. or model.; buffers aside).
    /// </summary>
    public static IReadOnlySet<TensorDType> MatrixTypes(SafetensorsCheckpoint checkpoint, ModelConfig config)
    {
        ArgumentNullException.ThrowIfNull(checkpoint);
        ArgumentNullException.ThrowIfNull(config);
        var names = CheckpointLayout.For(config).ExpectedParameters(config).Where(p => p.Shape.Length >= 2).Select(p => p.Name).ToHashSet(StringComparer.Ordinal);
        bool IsMatrix(string name)
        {
            for (string rest = name; ; rest = rest[(rest.IndexOf('.', StringComparison.Ordinal) + 1)..])
            {
                if (names.Contains(rest))
                {
                    return true;
                }
                if (!rest.Contains('.', StringComparison.Ordinal))
                {
                    return false;
                }
            }
        }
        return checkpoint.Tensors.Where(t => IsMatrix(t.Name)).Select(t => t.DType).ToHashSet();
    }

    /// <summary>
    /// The storage <c>--weights auto</c> takes for a checkpoint: bfloat16 when every matrix parameter
    /// (<see cref="MatrixTypes"/>) is BF16, which then loses nothing; float32 otherwise (F32, and F16, which widens to
    /// float32 exactly).
    /// </summary>
    public static WeightPrecision AutomaticPrecision(SafetensorsCheckpoint checkpoint, ModelConfig config) =>
        MatrixTypes(checkpoint, config).SetEquals([TensorDType.BF16]) ? WeightPrecision.BFloat16 : WeightPrecision.Binary32;

    /// <summary>
    /// An estimate of the memory one forward pass over <paramref name="tokenBudget"/> tokens takes beyond the weights:
    /// the residual stream and its normed copy, q/k/v, the attention output, the MLP's inner activations (twice, for the
    /// gate) and the parallel residual's input, doubled for the buffer pool's rounding up to powers of two; plus logits
    /// at every position (what cross-entropy asks for, the most any command does); plus one attention scratch per core
    /// for a sequence as long as the budget or the context allows.
    /// </summary>
    public static long ActivationBytesFor(ModelConfig config, int tokenBudget)
    {
        ArgumentNullException.ThrowIfNull(config);
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(tokenBudget);
        long q = (long)config.Heads * config.HeadWidth, kv = (long)config.KeyValueHeads * config.HeadWidth;
        long perToken = (3L * config.Width) + q + (2 * kv) + q + ((config.GatedMlp ? 2L : 1L) * config.InnerWidth);
        long attention = Environment.ProcessorCount * AttentionScratch.BytesFor(
            new AttentionShape(config.Heads, config.KeyValueHeads, config.HeadWidth, Window: 0), Math.Min(tokenBudget, config.ContextLength));
        return (2 * sizeof(float) * tokenBudget * perToken) + ((long)sizeof(float) * tokenBudget * config.VocabularySize) + attention;
    }

    /// <summary>
    /// The memory this process can still take: the kernel's MemAvailable (Linux), bounded by the runtime's view of the
    /// container or job limit less what the process already holds; null where neither is known.
    /// </summary>
    public static long? AvailableMemoryBytes()
    {
        long? available = null;
        try
        {
            foreach (string line in File.ReadLines("/proc/meminfo"))
            {
                if (line.StartsWith("MemAvailable:", StringComparison.Ordinal)
                    && long.TryParse(line["MemAvailable:".Length..].Replace("kB", "", StringComparison.Ordinal).Trim(), NumberStyles.None, CultureInfo.InvariantCulture, out long kb))
                {
                    available = kb * 1024;
                    break;
                }
            }
        }
        catch (IOException)
        {
        }
        catch (UnauthorizedAccessException)
        {
        }
        long limit = GC.GetGCMemoryInfo().TotalAvailableMemoryBytes - Environment.WorkingSet;
        return limit > 0 ? Math.Min(available ?? limit, limit) : available;
    }

    /// <summary>
    /// Opens a checkpoint folder in <paramref name="precision"/> (null: <see cref="AutomaticPrecision"/>) after checking
    /// that its weights plus the activations of <paramref name="tokenBudget"/> tokens fit in the available memory.
    /// </summary>
    /// <exception cref="ModelMemoryException">The estimate exceeds the available memory; nothing was loaded.</exception>
    /// <inheritdoc cref="Open(string)"/>
    public static LanguageModel Open(string folder, WeightPrecision? precision, int tokenBudget) =>
        Open(folder, precision, tokenBudget, AvailableMemoryBytes());

    internal static LanguageModel Open(string folder, WeightPrecision? precision, int tokenBudget, long? availableBytes)
    {
        ArgumentNullException.ThrowIfNull(folder);
        if (!Directory.Exists(folder))
        {
            throw new DirectoryNotFoundException($"{folder}: no such model folder");
        }
        string configPath = Path.Combine(folder, ModelConfig.FileName);
        ModelConfig config = ModelConfig.Load(configPath);
        WeightPrecision chosen;
        using (SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder))
        {
            chosen = precision ?? AutomaticPrecision(checkpoint, config);
        }
        long weights = WeightBytesFor(config, chosen), activations = ActivationBytesFor(config, tokenBudget);
        if (availableBytes is long available && weights + activations > available)
        {
            static string GiB(long bytes) => string.Create(CultureInfo.InvariantCulture, $"{bytes / (double)(1L << 30):F2} GiB");
            throw new ModelMemoryException(configPath,
                $"{folder} in {Spellings.Of(chosen)} needs an estimated {GiB(weights + activations)} (weights {GiB(weights)}, activations for {tokenBudget:N0} tokens {GiB(activations)}), "
                + $"but this machine has {GiB(available)} available; choose a smaller --weights storage or --token-budget, or free memory",
                weights + activations, available);
        }
        return Open(folder, chosen);
    }

    /// <summary>
    /// Opens a checkpoint folder: reads and validates config.json, the tokenizer and every tensor. The tokenizer is read
    /// on a second thread while the weights load (a tokenizer error stops the load at the next tensor and is the one
    /// reported), and the folder's files are hashed on a third (<see cref="Files"/>).
    /// </summary>
    /// <exception cref="ModelConfigException">config.json is missing, malformed or unsupported.</exception>
    /// <exception cref="WeightsFormatException">The weights are malformed or do not match the config.</exception>
    /// <exception cref="TokenizerFileException">The tokenizer files are malformed or do not fit the model.</exception>
    public static LanguageModel Open(string folder) => Open(folder, WeightPrecision.Binary32);

    /// <summary>Opens a checkpoint folder holding its matrices in <paramref name="precision"/>.</summary>
    /// <inheritdoc cref="Open(string)"/>
    public static LanguageModel Open(string folder, WeightPrecision precision)
    {
        if (!Enum.IsDefined(precision))
        {
            throw new ArgumentOutOfRangeException(nameof(precision), precision, "not a weight precision");
        }
        ArgumentNullException.ThrowIfNull(folder);
        if (!Directory.Exists(folder))
        {
            throw new DirectoryNotFoundException($"{folder}: no such model folder");
        }
        string configPath = Path.Combine(folder, ModelConfig.FileName);
        ModelConfig config = ModelConfig.Load(configPath);
        Task<IReadOnlyList<ModelFile>> files = Task.Run(() => ModelFile.Describe(folder));
        using var tokenizerFailed = new CancellationTokenSource();
        Task<TextTokenizer> tokenizer = Task.Run(() =>
        {
            try
            {
                TextTokenizer t = TextTokenizer.OpenFolder(folder);
                CheckTokenizer(t, config, configPath);
                return t;
            }
            catch
            {
                tokenizerFailed.Cancel();
                throw;
            }
        });
        ModelWeights weights;
        try
        {
            using SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder);
            weights = CheckpointLayout.For(config).Load(checkpoint, config, configPath, precision, tokenizerFailed.Token);
        }
        catch (Exception) when (Finished(tokenizer).IsFaulted)
        {
            // The tokenizer's error comes first, as it did when the tokenizer was read before the weights.
            throw tokenizer.Exception!.InnerException!;
        }
        return new LanguageModel(folder, config, tokenizer.GetAwaiter().GetResult(), weights, files);
    }

    /// <summary><paramref name="task"/> once it has ended, however it ended.</summary>
    private static Task Finished(Task task)
    {
        Task.WaitAny(task);
        return task;
    }

    /// <summary>Checks that every id the tokenizer gives is one the model's vocabulary has.</summary>
    /// <exception cref="TokenizerFileException">The tokenizer has ids beyond the config's vocab_size.</exception>
    public static void CheckTokenizer(TextTokenizer tokenizer, ModelConfig config, string configPath)
    {
        ArgumentNullException.ThrowIfNull(tokenizer);
        ArgumentNullException.ThrowIfNull(config);
        if (tokenizer.VocabularySize > config.VocabularySize)
        {
            throw new TokenizerFileException(tokenizer.Source,
                $"the tokenizer has ids up to {tokenizer.VocabularySize - 1}; {configPath} has vocab_size {config.VocabularySize}");
        }
    }

    /// <summary>
    /// Checks a checkpoint against a config without converting anything: every parameter the config implies is
    /// present with its shape and a floating dtype, and nothing else is stored but the family's known buffers.
    /// </summary>
    /// <exception cref="WeightsFormatException">The first mismatch, naming the tensor and its file.</exception>
    public static CheckpointSummary CheckCheckpoint(SafetensorsCheckpoint checkpoint, ModelConfig config, string configPath)
    {
        ArgumentNullException.ThrowIfNull(checkpoint);
        ArgumentNullException.ThrowIfNull(config);
        return CheckpointLayout.For(config).Check(checkpoint, config, configPath);
    }

    /// <summary>
    /// Runs the model over a batch of token sequences of any lengths (1 … context length each). All tokens of the
    /// batch go through each matrix product together, unpadded; attention runs per sequence and head in parallel.
    /// </summary>
    /// <exception cref="ArgumentException">A sequence is empty, too long, or holds an id outside the vocabulary.</exception>
    public ForwardResult Forward(IReadOnlyList<int[]> sequences, ForwardOptions? options = null) =>
        Forward(sequences, options, KernelSelector.Current);

    /// <summary>The forward pass on a chosen kernel path (tests compare every path against the reference).</summary>
    internal ForwardResult Forward(IReadOnlyList<int[]> sequences, ForwardOptions? options, KernelVariant variant)
    {
        ArgumentNullException.ThrowIfNull(sequences);
        options ??= ForwardOptions.LastLogits;
        ModelConfig c = Config;
        foreach (int layer in options.HiddenLayers)
        {
            if (layer < 0 || layer > c.Layers)
            {
                throw new ArgumentException($"hidden layer {layer} is outside 0 … {c.Layers}", nameof(options));
            }
        }

        int[] starts = new int[sequences.Count];
        int[] lengths = new int[sequences.Count];
        int total = 0;
        for (int s = 0; s < sequences.Count; s++)
        {
            int[] seq = sequences[s] ?? throw new ArgumentException($"sequence {s} is null", nameof(sequences));
            if (seq.Length == 0 || seq.Length > c.ContextLength)
            {
                throw new ArgumentException(
                    $"sequence {s} has {seq.Length} tokens; each must have 1 … {c.ContextLength.ToString(CultureInfo.InvariantCulture)} (the context length)",
                    nameof(sequences));
            }
            foreach (int id in seq)
            {
                if ((uint)id >= (uint)c.VocabularySize)
                {
                    throw new ArgumentException($"sequence {s} holds token id {id}; the vocabulary is 0 … {c.VocabularySize - 1}", nameof(sequences));
                }
            }
            starts[s] = total;
            lengths[s] = seq.Length;
            total = checked(total + seq.Length);
        }

        return new ForwardPass(_weights, c, variant, options.Parallelism, Folder).Run(sequences, starts, lengths, total, options);
    }
}
