namespace Assay.Cli.Commands;

/// <summary>Runs a command body and turns the engine's input errors into one line on stderr and exit code 2.</summary>
internal static class CommandRunner
{
    public const int BadInput = 2;

    public static int Run(Func<int> body)
    {
        try
        {
            return body();
        }
        catch (InvalidInputException e)
        {
            Console.Error.WriteLine($"assay: {e.Message}");
            return BadInput;
        }
        catch (Exception e) when (e is DirectoryNotFoundException or FileNotFoundException or ArgumentException)
        {
            Console.Error.WriteLine($"assay: {e.Message}");
            return BadInput;
        }
    }
}
