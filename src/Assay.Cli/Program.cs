using System.CommandLine;
using Assay.Cli.Commands;
using Assay.Kernels;

var root = new RootCommand("assay: run GPT-2, Llama, Mistral, Qwen2 and NeoX-style language models from safetensors checkpoints on the CPU, extract what they compute, and probe it.");
root.Subcommands.Add(InspectCommand.Create());
root.Subcommands.Add(NextCommand.Create());
root.Subcommands.Add(TokenizeCommand.Create());
root.Subcommands.Add(ExtractCommand.Create());
root.Subcommands.Add(MergeCommand.Create());
root.Subcommands.Add(ManifestCommand.Create());
root.Subcommands.Add(ProbeCommand.Create());
root.Subcommands.Add(CompareCommand.Create());
root.Subcommands.Add(CrossEntropyCommand.Create());
root.Subcommands.Add(ZeroShotCommand.Create());
root.Subcommands.Add(StudyCommand.Create());

ParseResult parsed = root.Parse(args);
if (parsed.Errors.Count > 0)
{
    // One line: the first problem and where the usage is, not the whole help text.
    // A word it does not know explains the rest ("no command given" follows from it): say that first.
    string first = parsed.Errors.Select(e => e.Message).FirstOrDefault(m => m.StartsWith("Unrecognized", StringComparison.Ordinal)) ?? parsed.Errors[0].Message;
    Console.Error.WriteLine($"assay: {Usage.Describe(first)}; see '{Usage.CommandPath(parsed.CommandResult.Command, root)} --help'");
    return CommandRunner.BadInput;
}
if (KernelSelector.EnvironmentProblem is string problem)
{
    // Checked before any command runs, so no command starts on a setting it would refuse halfway.
    Console.Error.WriteLine($"assay: {problem}");
    return CommandRunner.BadInput;
}
return parsed.Invoke();
