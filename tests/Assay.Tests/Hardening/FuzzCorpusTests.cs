using Assay.Fuzz;
using Assay.Tests.Support;

namespace Assay.Tests.Hardening;

/// <summary>
/// Replays the fuzz corpus (tools/Assay.Fuzz/corpus: the seeds, the inputs AFL++ found new coverage with, and any
/// input that once broke a loader) through the same targets tools/fuzz.sh runs under afl-fuzz, so every loader keeps
/// its contract on them in the default test run: the loader's own exception naming the file, or a file that loads
/// and is usable.
/// </summary>
public sealed class FuzzCorpusTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    public static TheoryData<string> Targets() => new(FuzzTargets.Names);

    [Theory]
    [MemberData(nameof(Targets))]
    public void Every_corpus_input_keeps_the_loader_contract(string target)
    {
        string folder = Path.Combine(AppContext.BaseDirectory, "FuzzCorpus", target);
        string[] inputs = Directory.GetFiles(folder);
        Assert.NotEmpty(inputs);
        var targets = new FuzzTargets(_temp.Path);
        foreach (string input in inputs)
        {
            try
            {
                targets.Run(target, File.ReadAllBytes(input));
            }
            catch (Exception e)
            {
                Assert.Fail($"{target} broke its contract on {Path.GetFileName(input)}: {e}");
            }
        }
    }

    [Fact]
    public void A_loader_exception_that_does_not_name_the_file_is_a_finding()
    {
        // The harness must tell a contract break from a kept contract, or the fuzz run cannot fail: a config whose
        // error names the file passes; the check itself is shown to fire on an exception that names another file.
        var targets = new FuzzTargets(_temp.Path);
        targets.Run("config", "{\"n_embd\": -1}"u8.ToArray());
        Assert.Throws<ContractBrokenException>(() => FuzzTargets.Expect<Assay.Config.ModelConfigException>(
            _temp.File("config.json"), _ => throw new Assay.Config.ModelConfigException("/elsewhere/config.json", "n_embd", "must be positive")));
        Assert.Throws<InvalidOperationException>(() => FuzzTargets.Expect<Assay.Config.ModelConfigException>(
            _temp.File("config.json"), _ => throw new InvalidOperationException("not the loader's exception")));
    }
}
