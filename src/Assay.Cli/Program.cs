using System.CommandLine;
using Assay.Cli.Commands;

var root = new RootCommand("assay: run GPT-2-family language models from safetensors checkpoints on the CPU and extract what they compute.");
root.Subcommands.Add(InspectCommand.Create());
root.Subcommands.Add(NextCommand.Create());
root.Subcommands.Add(ExtractCommand.Create());
root.Subcommands.Add(MergeCommand.Create());
root.Subcommands.Add(ManifestCommand.Create());
root.Subcommands.Add(ProbeCommand.Create());
root.Subcommands.Add(CrossEntropyCommand.Create());
root.Subcommands.Add(ZeroShotCommand.Create());
root.Subcommands.Add(StudyCommand.Create());
return root.Parse(args).Invoke();
