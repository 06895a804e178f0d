using System.Globalization;
using Assay.Fuzz;
using SharpFuzz;

// assay-fuzz TARGET           run TARGET under afl-fuzz (SharpFuzz's fork server; once on stdin otherwise)
// assay-fuzz TARGET FILE...   replay files through TARGET and say which, if any, break the loader's contract
// tools/fuzz.sh instruments the engine and drives afl-fuzz over every target.
if (args.Length == 0 || !FuzzTargets.Names.Contains(args[0]))
{
    Console.Error.WriteLine($"usage: assay-fuzz TARGET [FILE...]; TARGET is one of {string.Join(", ", FuzzTargets.Names)}");
    return 64;
}

string target = args[0];
string work = Path.Combine(Path.GetTempPath(), string.Create(CultureInfo.InvariantCulture, $"assay-fuzz-{Environment.ProcessId}"));
var targets = new FuzzTargets(work);
try
{
    if (args.Length == 1)
    {
        Fuzzer.Run(stream =>
        {
            using var buffer = new MemoryStream();
            stream.CopyTo(buffer);
            targets.Run(target, buffer.ToArray());
        });
        return 0;
    }

    int failed = 0;
    foreach (string file in args.Skip(1))
    {
        try
        {
            targets.Run(target, File.ReadAllBytes(file));
        }
#pragma warning disable CA1031 // replay reports every escaping exception, whatever its type
        catch (Exception e)
#pragma warning restore CA1031
        {
            failed++;
            Console.WriteLine($"{file}: {e}");
        }
    }
    Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{args.Length - 1 - failed} of {args.Length - 1} inputs kept the contract"));
    return failed == 0 ? 0 : 1;
}
finally
{
    Directory.Delete(work, recursive: true);
}
