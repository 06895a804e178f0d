using System.Globalization;
using Assay.Benchmarks;
using Assay.Fixtures;
using Assay.Model;
using Assay.TorchBenchmark;
using TorchSharp;
using static TorchSharp.torch;
using Assay.Weights;

// assay-torch-bench [--shape gpt2-small|llama-1b] [--batch B] [--length T] [--repeats R] [--threads N] [--torch-bfloat16 on|off]
// assay-torch-bench [--shape gpt2-small|llama-1b] --lengths T1,T2,… [--tokens N] [--repeats R] [--threads N] [--torch-bfloat16 on|off]
// One run, one process: the engine's forward pass and libtorch's (float32 and bfloat16) on the same random weights
// (Assay.Fixtures' deterministic checkpoint: GPT-2 small in float32, or a Llama-style 1B shape — hidden 2048, 16
// layers, 32 heads on 8 key/value heads, intermediate 8192, vocabulary 128,256, tied — stored in bfloat16, which
// widens exactly) and the same token batches, head at the last position only; the FMA peak of this CPU measured in
// the same run; medians of R timed repeats after one warm-up each. Prints the CPU, the kernel paths and a Markdown table.
// With --lengths: tokens/s of each system at each row length instead (LengthSweep), about N tokens a batch (default 2048).
// --torch-bfloat16 off leaves libtorch's bfloat16 pass out (its columns say so): on a CPU without bfloat16 dot-product
// instructions it ran at 6 tokens/s at GPT-2 small, which would make a sweep take hours.
int batch = 8, length = 128, repeats = 5, threads = Environment.ProcessorCount, sweepTokens = 2048;
string shape = "gpt2-small";
bool torchBFloat16 = true;
int[]? lengths = null;
for (int i = 0; i + 1 < args.Length; i += 2)
{
    if (args[i] == "--shape")
    {
        shape = args[i + 1];
        continue;
    }
    if (args[i] == "--torch-bfloat16" && args[i + 1] is "on" or "off")
    {
        torchBFloat16 = args[i + 1] == "on";
        continue;
    }
    if (args[i] == "--lengths")
    {
        lengths = [.. args[i + 1].Split(',').Select(t => int.Parse(t, CultureInfo.InvariantCulture))];
        continue;
    }
    int v = int.Parse(args[i + 1], CultureInfo.InvariantCulture);
    switch (args[i])
    {
        case "--batch": batch = v; break;
        case "--length": length = v; break;
        case "--repeats": repeats = v; break;
        case "--threads": threads = v; break;
        case "--tokens": sweepTokens = v; break;
        default:
            Console.Error.WriteLine($"assay-torch-bench: unknown option {args[i]}");
            return 2;
    }
}
if (args.Length % 2 != 0 || shape is not ("gpt2-small" or "llama-1b"))
{
    Console.Error.WriteLine("usage: assay-torch-bench [--shape gpt2-small|llama-1b] [--batch B] [--length T] [--repeats R] [--threads N] [--torch-bfloat16 on|off]\n       assay-torch-bench [--shape gpt2-small|llama-1b] --lengths T1,T2,… [--tokens N] [--repeats R] [--threads N] [--torch-bfloat16 on|off]");
    return 2;
}
torch.set_num_threads(threads);
CultureInfo inv = CultureInfo.InvariantCulture;
bool llama = shape == "llama-1b";
CheckpointSpec spec = llama
    ? CheckpointSpec.Llama1B with { Context = Math.Max(2048, lengths?.Max() ?? length), Tokenizer = TokenizerFiles.None }
    : CheckpointSpec.Gpt2Small with { DType = "F32" };
string CpuInfo(string field) => File.Exists("/proc/cpuinfo")
    ? File.ReadLines("/proc/cpuinfo").FirstOrDefault(l => l.StartsWith(field, StringComparison.Ordinal))?.Split(':', 2)[1].Trim() ?? ""
    : "";
string[] flags = CpuInfo("flags").Split(' ');
string bf16Instructions = string.Join(", ", flags.Where(f => f is "avx512_bf16" or "amx_bf16"));
string cpu = (CpuInfo("model name") is { Length: > 0 } name ? name : "unknown") + ", " + Environment.ProcessorCount.ToString(inv)
    + " cores; bfloat16 dot-product instructions (/proc/cpuinfo): " + (bf16Instructions.Length > 0 ? bf16Instructions : "none");
string folder = Path.Combine(Path.GetTempPath(), "assay-torch-bench-" + Environment.ProcessId.ToString(inv));
try
{
    Console.Error.WriteLine($"writing the {shape}-shaped checkpoint to {folder} …");
    SyntheticCheckpoint.Write(spec, folder);
    if (lengths != null)
    {
        Console.WriteLine(string.Create(inv, $"CPU: {cpu}; engine kernels {LanguageModel.Kernels}, int8 {LanguageModel.Int8Kernels}; shape {shape}."));
        LengthSweep.Run(spec, folder, lengths, sweepTokens, repeats, threads, torchBFloat16, Torch, Console.Out);
        return 0;
    }
    var rng = new DeterministicRandom(7);
    int[][] sequences = [.. Enumerable.Range(0, batch).Select(_ => Enumerable.Range(0, length).Select(_ => (int)(rng.NextUInt64() % (ulong)spec.Vocabulary)).ToArray())];
    long[] flat = [.. sequences.SelectMany(s => s).Select(t => (long)t)];
    long tokens = (long)batch * length;

    // The FMA peak first: libtorch's OpenMP workers keep spinning after their work and would take cores from it.
    double peak = FmaPeak.Measure(threads);
    var options = new ForwardOptions { Logits = LogitPositions.Last, HiddenLayers = [spec.Layers], MaxThreads = threads };
    (double Seconds, float[] Logits, float[] Hidden) RunEngine(WeightPrecision precision)
    {
        LanguageModel engine = LanguageModel.Open(folder, precision);
        float[] logits = [], hidden = [];
        double seconds = FmaPeak.Median(repeats, () =>
        {
            ForwardResult r = engine.Forward(sequences, options);
            logits = new float[batch * spec.Vocabulary];
            hidden = new float[batch * spec.Width];
            for (int s = 0; s < batch; s++)
            {
                r.Logits(s, length - 1).CopyTo(logits.AsSpan(s * spec.Vocabulary, spec.Vocabulary));
                r.HiddenState(spec.Layers, s, length - 1).CopyTo(hidden.AsSpan(s * spec.Width, spec.Width));
            }
        });
        Console.Error.WriteLine(string.Create(inv, $"engine {precision}: {seconds:F3} s; weights {engine.WeightBytes:N0} bytes"));
        return (seconds, logits, hidden);
    }
    var engine32 = RunEngine(WeightPrecision.Binary32);
    var engine16 = RunEngine(WeightPrecision.BFloat16);
    var engine8 = RunEngine(WeightPrecision.Integer8);
    double engineSeconds = engine32.Seconds;
    float[] engineLogits = engine32.Logits;

    double torchGemm = TorchMatmul(1024, spec.Width, spec.InnerWidth, repeats);
    double torch32, torch16, maxDiff, torchDrift;
    ITorchModel Torch(ScalarType type) => llama
        ? new TorchLlama(spec, SyntheticCheckpoint.Parameters(spec), type)
        : new TorchGpt2(spec, SyntheticCheckpoint.Parameters(spec), type);
    using (ITorchModel t32 = Torch(ScalarType.Float32))
    {
        float[] torchLogits = [];
        torch32 = FmaPeak.Median(repeats, () => torchLogits = t32.Forward(flat, batch, length));
        maxDiff = engineLogits.Zip(torchLogits, (a, b) => Math.Abs(a - b)).Max();
    }
    if (torchBFloat16)
    {
        using ITorchModel t16 = Torch(ScalarType.BFloat16);
        float[] torchLogits16 = [];
        torch16 = FmaPeak.Median(repeats, () => torchLogits16 = t16.Forward(flat, batch, length));
        torchDrift = WorstCosine(engineLogits, torchLogits16, spec.Vocabulary);
    }
    else
    {
        torch16 = torchDrift = double.NaN;
    }

    // Multiply-adds of the pass: per token and layer the projections (q, k, v, output and the MLP's two or three
    // matrices) plus the causal attention's two products (on average (T+1)/2 keys per query head), and the head at B positions.
    double d = spec.Width, m = spec.InnerWidth, q = spec.Heads * spec.HeadWidth, kvWidth = spec.KvHeads * spec.HeadWidth;
    double projections = (d * (q + (2 * kvWidth))) + (q * d) + ((llama ? 3 : 2) * d * m);
    double flops = (2.0 * tokens * spec.Layers * (projections + (q * (length + 1)))) + (2.0 * batch * d * spec.Vocabulary);

    Console.WriteLine(string.Create(inv, $"CPU: {cpu}; engine kernels {LanguageModel.Kernels}, int8 {LanguageModel.Int8Kernels}."));
    Console.WriteLine(llama
        ? string.Create(inv, $"Llama-style 1B shape (16 layers, width 2048, 32 heads on 8 key/value heads, MLP 8192 gated, vocabulary 128,256, tied), {batch} × {length} tokens, head at the last position; {threads} threads; medians of {repeats}.")
        : string.Create(inv, $"GPT-2-small shape (12 layers, width 768, vocabulary 50,257), {batch} × {length} tokens, head at the last position; {threads} threads; medians of {repeats}."));
    Console.WriteLine();
    Console.WriteLine("| | seconds | tokens/s | GFLOP/s | of the FMA peak | engine speed-up over it |");
    Console.WriteLine("|---|---:|---:|---:|---:|---:|");
    void Row(string name, double seconds) => Console.WriteLine(string.Create(inv,
        $"| {name} | {seconds:F3} | {tokens / seconds:F0} | {flops / seconds / 1e9:F1} | {flops / seconds / 1e9 / peak:P0} | {seconds / engineSeconds:F2} |"));
    Row("engine, float32", engineSeconds);
    Row("engine, bfloat16 weights", engine16.Seconds);
    Row("engine, int8 projections", engine8.Seconds);
    Row("libtorch 2.10, float32", torch32);
    if (torchBFloat16)
    {
        Row("libtorch 2.10, bfloat16", torch16);
    }
    else
    {
        Console.WriteLine("| libtorch 2.10, bfloat16 | not run (--torch-bfloat16 off) | | | | |");
    }
    Console.WriteLine();
    Console.WriteLine(string.Create(inv, $"Engine over libtorch float32: {torch32 / engineSeconds:F2}×.") + (torchBFloat16
        ? string.Create(inv, $" Engine bfloat16 over libtorch bfloat16: {torch16 / engine16.Seconds:F2}×; engine int8 over libtorch bfloat16: {torch16 / engine8.Seconds:F2}×.")
        : " libtorch bfloat16 not run."));
    Console.WriteLine();
    Console.WriteLine("Drift against the engine's float32 pass, worst of the batch's last positions (cosine; max abs difference):");
    Console.WriteLine();
    Console.WriteLine("| | final hidden state | last-position logits |");
    Console.WriteLine("|---|---|---|");
    Console.WriteLine(string.Create(inv, $"| engine, bfloat16 weights | {WorstCosine(engine32.Hidden, engine16.Hidden, spec.Width):F6}; {MaxAbs(engine32.Hidden, engine16.Hidden):G3} | {WorstCosine(engineLogits, engine16.Logits, spec.Vocabulary):F6}; {MaxAbs(engineLogits, engine16.Logits):G3} |"));
    Console.WriteLine(string.Create(inv, $"| engine, int8 projections | {WorstCosine(engine32.Hidden, engine8.Hidden, spec.Width):F6}; {MaxAbs(engine32.Hidden, engine8.Hidden):G3} | {WorstCosine(engineLogits, engine8.Logits, spec.Vocabulary):F6}; {MaxAbs(engineLogits, engine8.Logits):G3} |"));
    Console.WriteLine(torchBFloat16 ? string.Create(inv, $"| libtorch, bfloat16 | | {torchDrift:F6} |") : "| libtorch, bfloat16 | | not run |");
    Console.WriteLine();
    Console.WriteLine(string.Create(inv, $"FMA peak (register-only {FmaPeak.Width} loop, {threads} threads): {peak:F1} GFLOP/s. libtorch float32 matmul 1024 × {spec.Width} · {spec.Width} × {spec.InnerWidth}: {torchGemm:F1} GFLOP/s."));
    Console.WriteLine(string.Create(inv, $"Engine vs libtorch float32 last-position logits: max abs difference {maxDiff:G3}."));
    return 0;
}
finally
{
    Directory.Delete(folder, recursive: true);
}

static double WorstCosine(float[] x, float[] y, int width)
{
    double worst = 1;
    for (int r = 0; r < x.Length / width; r++)
    {
        double xy = 0, xx = 0, yy = 0;
        for (int i = r * width; i < (r + 1) * width; i++)
        {
            xy += (double)x[i] * y[i];
            xx += (double)x[i] * x[i];
            yy += (double)y[i] * y[i];
        }
        worst = Math.Min(worst, xy / Math.Sqrt(xx * yy));
    }
    return worst;
}

static double MaxAbs(float[] x, float[] y) => x.Zip(y, (a, b) => Math.Abs((double)a - b)).Max();

static double TorchMatmul(int m, int k, int n, int repeats)
{
    using var noGrad = no_grad();
    using Tensor a = randn(m, k), b = randn(k, n);
    double seconds = FmaPeak.Median(repeats, () =>
    {
        using Tensor c = a.matmul(b);
    });
    return 2.0 * m * k * n / seconds / 1e9;
}
