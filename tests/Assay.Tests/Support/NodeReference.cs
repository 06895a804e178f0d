using System.Diagnostics;

namespace Assay.Tests.Support;

/// <summary>
/// Runs the node reference scripts (Reference/*.cjs) with the packages of Reference/package.json, installed by
/// <c>npm ci --prefix tests/Assay.Tests/Reference</c> (as tools/test.sh does). A missing node or package fails the test with
/// that command; it never skips.
/// </summary>
public static class NodeReference
{
    public static string Run(string script, params string[] args)
    {
        string reference = Path.Combine(Model.WeightsManifestPinTests.RepositoryRoot(), "tests", "Assay.Tests", "Reference");
        string modules = Path.Combine(reference, "node_modules");
        using (var package = System.Text.Json.JsonDocument.Parse(File.ReadAllText(Path.Combine(reference, "package.json"))))
        {
            foreach (System.Text.Json.JsonProperty dependency in package.RootElement.GetProperty("dependencies").EnumerateObject())
            {
                Assert.True(Directory.Exists(Path.Combine(modules, dependency.Name)),
                    $"{modules} lacks {dependency.Name}: npm ci --prefix tests/Assay.Tests/Reference");
            }
        }
        var psi = new ProcessStartInfo("node") { RedirectStandardOutput = true, RedirectStandardError = true };
        psi.Environment["NODE_PATH"] = modules;
        psi.ArgumentList.Add(PythonReference.Script(script));
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        Process p;
        try
        {
            p = Process.Start(psi)!;
        }
        catch (System.ComponentModel.Win32Exception e)
        {
            Assert.Fail($"node is missing ({e.Message}): apt-get install nodejs npm");
            throw;
        }
        using (p)
        {
            Task<string> stdout = p.StandardOutput.ReadToEndAsync();
            Task<string> stderr = p.StandardError.ReadToEndAsync();
            p.WaitForExit();
            Assert.True(p.ExitCode == 0, $"{script} failed ({p.ExitCode})\n{stderr.Result}");
            return stdout.Result;
        }
    }
}
