using System.Globalization;
using Assay.Benchmarks;

// assay-bench extract-scaling [--model DIR | --shape demo|gpt2-small|llama-1b|llama-8b] [--weights W] [--rows N] [--factor K] [--repeats R] [--features LIST]
// assay-bench gemm [--repeats R] [--threads N]
// assay-bench kernels [BenchmarkDotNet arguments]
// assay-bench tokenize
// assay-bench attention [--repeats R]
const string usage = "usage: assay-bench extract-scaling [--model DIR | --shape demo|gpt2-small|llama-1b|llama-8b] [--weights auto|float32|bfloat16|int8] [--rows N] [--factor K] [--repeats R] [--features LIST]\n       assay-bench gemm [--repeats R] [--threads N]\n       assay-bench kernels [BenchmarkDotNet arguments, e.g. --filter *Gemm*]\n       assay-bench tokenize\n       assay-bench attention [--repeats R]";
if (args.Length is 1 or 3 && args[0] == "attention")
{
    return AttentionScaling.Run(args.Length == 3 && args[1] == "--repeats" ? int.Parse(args[2], CultureInfo.InvariantCulture) : 5, Console.Out);
}
if (args.Length == 1 && args[0] == "tokenize")
{
    return TokenizeScaling.Run(Console.Out);
}
if (args.Length > 0 && args[0] == "kernels")
{
    BenchmarkDotNet.Running.BenchmarkRunner.Run<KernelBenchmarks>(args: args[1..]);
    return 0;
}
if (args.Length > 0 && args[0] == "gemm")
{
    int gemmRepeats = 5, threads = Environment.ProcessorCount;
    for (int i = 1; i < args.Length; i += 2)
    {
        int value = i + 1 < args.Length ? int.Parse(args[i + 1], CultureInfo.InvariantCulture) : throw new ArgumentException($"{args[i]} needs a value");
        switch (args[i])
        {
            case "--repeats": gemmRepeats = value; break;
            case "--threads": threads = value; break;
            default:
                Console.Error.WriteLine(usage);
                return 2;
        }
    }
    return GemmThroughput.Run(gemmRepeats, threads, Console.Out);
}
if (args.Length == 0 || args[0] != "extract-scaling")
{
    Console.Error.WriteLine(usage);
    return 2;
}
string? model = null;
string shape = "demo", weights = "float32";
int rows = 1000, factor = 10, repeats = 3;
string features = "hidden,cmean";
for (int i = 1; i < args.Length; i += 2)
{
    string value = i + 1 < args.Length ? args[i + 1] : throw new ArgumentException($"{args[i]} needs a value");
    switch (args[i])
    {
        case "--model": model = value; break;
        case "--shape": shape = value; break;
        case "--weights": weights = value; break;
        case "--rows": rows = int.Parse(value, CultureInfo.InvariantCulture); break;
        case "--factor": factor = int.Parse(value, CultureInfo.InvariantCulture); break;
        case "--repeats": repeats = int.Parse(value, CultureInfo.InvariantCulture); break;
        case "--features": features = value; break;
        default:
            Console.Error.WriteLine($"assay-bench: unknown option {args[i]}");
            return 2;
    }
}
return ExtractScaling.Run(model, shape, weights, rows, factor, repeats, features, Console.Out);
