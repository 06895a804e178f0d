// Checks every kernel path this CPU has against the scalar path's bits and prints digests of the outputs
// (README: Kernel paths). Exit 0 when every path agrees, 1 when one differs, 2 for bad arguments.
//
//   assay-kernel-check [--model FOLDER]
using Assay;
using Assay.KernelCheck;

string? model = null;
if (args is ["--model", string folder])
{
    model = folder;
}
else if (args.Length > 0)
{
    Console.Error.WriteLine("usage: assay-kernel-check [--model FOLDER]");
    return 2;
}
try
{
    return KernelCheck.Run(model, Console.Out);
}
catch (Exception e) when (e is InvalidInputException or DirectoryNotFoundException or IOException or InvalidOperationException)
{
    Console.Error.WriteLine($"assay-kernel-check: {e.Message}");
    return 2;
}
