// Checks every kernel path this CPU has against the scalar path's bits and prints digests of the outputs
// (README: Kernel paths). Exit 0 when every path agrees, 1 when one differs, 2 for bad arguments.
//
//   assay-kernel-check [--model FOLDER [--values FOLDER]]
//
// --values writes the model's features (every layer's last-position hidden state, then Φp, for each of three fixed
// texts) as raw little-endian float32 to float32.bin and int8.bin in that folder.
using Assay;
using Assay.KernelCheck;

(string? model, string? values) = args switch
{
    [] => (null, null),
    ["--model", string m] => (m, null),
    ["--model", string m, "--values", string v] => (m, v),
    _ => ("", null),
};
if (model == "")
{
    Console.Error.WriteLine("usage: assay-kernel-check [--model FOLDER [--values FOLDER]]");
    return 2;
}
try
{
    return KernelCheck.Run(model, values, Console.Out);
}
catch (Exception e) when (e is InvalidInputException or DirectoryNotFoundException or IOException or InvalidOperationException)
{
    Console.Error.WriteLine($"assay-kernel-check: {e.Message}");
    return 2;
}
