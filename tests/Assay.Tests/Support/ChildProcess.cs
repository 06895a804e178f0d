using System.Diagnostics;

namespace Assay.Tests.Support;

/// <summary>Runs another program to its end for a test.</summary>
internal static class ChildProcess
{
    /// <summary>
    /// Runs <paramref name="file"/> and returns its standard output; a non-zero exit fails the test with both streams.
    /// MSBuild's and the test host's variables are never passed on; <paramref name="environment"/> adds or replaces others.
    /// </summary>
    public static string Run(string file, IEnumerable<string> args, string directory, IReadOnlyDictionary<string, string>? environment = null)
    {
        var psi = new ProcessStartInfo(file) { WorkingDirectory = directory, RedirectStandardOutput = true, RedirectStandardError = true };
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        foreach (string key in psi.Environment.Keys.Where(k => k.StartsWith("MSBUILD", StringComparison.OrdinalIgnoreCase) || k.StartsWith("VSTEST", StringComparison.OrdinalIgnoreCase) || k == "DOTNET_HOST_PATH").ToList())
        {
            psi.Environment.Remove(key);
        }
        psi.Environment["DOTNET_NOLOGO"] = "1";
        psi.Environment["DOTNET_CLI_TELEMETRY_OPTOUT"] = "1";
        foreach ((string key, string value) in environment ?? new Dictionary<string, string>())
        {
            psi.Environment[key] = value;
        }
        using Process p = Process.Start(psi)!;
        Task<string> stdout = p.StandardOutput.ReadToEndAsync(), stderr = p.StandardError.ReadToEndAsync();
        if (!p.WaitForExit(TimeSpan.FromMinutes(5)))
        {
            p.Kill(entireProcessTree: true);
            Assert.Fail($"{file} {string.Join(' ', psi.ArgumentList)}: still running after 5 minutes");
        }
        Assert.True(p.ExitCode == 0, $"{file} {string.Join(' ', psi.ArgumentList)} exited with {p.ExitCode}\n{stdout.Result}\n{stderr.Result}");
        return stdout.Result;
    }
}
