namespace Assay.Cli.Commands;

/// <summary>
/// Runs a command body and turns the engine's input errors into one line on stderr and exit code 2. The exit codes:
/// 0 done; 1 checked, and it differs (<c>assay manifest verify</c>); 2 bad input or usage; 74 a write failed (a full
/// disk or a read-only folder: the run resumes); 130 interrupted.
/// </summary>
internal static class CommandRunner
{
    /// <summary>Bad input or usage.</summary>
    public const int BadInput = 2;

    /// <summary>Runs <paramref name="body"/>; an input error becomes one line on <paramref name="err"/> (default: stderr) and exit code 2.</summary>
    public static int Run(Func<int> body, TextWriter? err = null)
    {
        try
        {
            return body();
        }
        catch (InvalidInputException e)
        {
            (err ?? Console.Error).WriteLine($"assay: {e.Message}");
            return BadInput;
        }
        catch (Exception e) when (e is DirectoryNotFoundException or FileNotFoundException or ArgumentException)
        {
            (err ?? Console.Error).WriteLine($"assay: {Message(e)}");
            return BadInput;
        }
    }

    /// <summary>
    /// The message's first line without .NET's " (Parameter 'name')" (and "Actual value was …" after it), which name
    /// code, not the user's input.
    /// </summary>
    public static string Message(Exception e)
    {
        string message = e.Message;
        if (e is ArgumentException { ParamName: string name })
        {
            int at = message.IndexOf($" (Parameter '{name}')", StringComparison.Ordinal);
            if (at >= 0)
            {
                message = message[..at];
            }
        }
        int newline = message.IndexOfAny(['\r', '\n']);
        return newline < 0 ? message : message[..newline];
    }
}
