using System.Globalization;
using Assay.Benchmarks;

// assay-bench extract-scaling [--model DIR] [--rows N] [--factor K] [--repeats R] [--features LIST]
// assay-bench gemm [--repeats R] [--threads N]
const string usage = "usage: assay-bench extract-scaling [--model DIR] [--rows N] [--factor K] [--repeats R] [--features LIST]\n       assay-bench gemm [--repeats R] [--threads N]";
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
int rows = 1000, factor = 10, repeats = 3;
string features = "hidden,cmean";
for (int i = 1; i < args.Length; i += 2)
{
    string value = i + 1 < args.Length ? args[i + 1] : throw new ArgumentException($"{args[i]} needs a value");
    switch (args[i])
    {
        case "--model": model = value; break;
        case "--rows": rows = int.Parse(value, CultureInfo.InvariantCulture); break;
        case "--factor": factor = int.Parse(value, CultureInfo.InvariantCulture); break;
        case "--repeats": repeats = int.Parse(value, CultureInfo.InvariantCulture); break;
        case "--features": features = value; break;
        default:
            Console.Error.WriteLine($"assay-bench: unknown option {args[i]}");
            return 2;
    }
}
return ExtractScaling.Run(model, rows, factor, repeats, features, Console.Out);
