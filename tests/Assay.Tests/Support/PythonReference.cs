using System.Diagnostics;

namespace Assay.Tests.Support;

/// <summary>
/// Runs the outside reference scripts with Debian's system interpreter and numpy (package python3-numpy). A missing
/// interpreter or numpy fails the test with the install command; it never skips.
/// </summary>
public static class PythonReference
{
    public const string Interpreter = "/usr/bin/python3";

    public static string Script(string name) => Path.Combine(AppContext.BaseDirectory, "Reference", name);

    public static string Run(string script, params string[] args)
    {
        Assert.True(File.Exists(Interpreter), $"{Interpreter} is missing: apt-get install python3 python3-numpy");
        var psi = new ProcessStartInfo(Interpreter) { RedirectStandardOutput = true, RedirectStandardError = true };
        psi.ArgumentList.Add(Script(script));
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        using Process p = Process.Start(psi)!;
        Task<string> stdout = p.StandardOutput.ReadToEndAsync();
        Task<string> stderr = p.StandardError.ReadToEndAsync();
        p.WaitForExit();
        Assert.True(p.ExitCode == 0,
            $"{script} failed ({p.ExitCode}); the references come from Debian: apt-get install python3-numpy python3-sklearn python3-scipy python3-sentencepiece\n{stderr.Result}");
        return stdout.Result;
    }
}
