using Assay.Cli.Commands;
using Assay.Input;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Cli;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Hardening;

/// <summary>An output path that names a file is a usage mistake: one line, exit 2, the file untouched; never "free space and resume".</summary>
public sealed class OutputPathTests
{
    [Fact]
    public void Every_command_that_writes_a_folder_refuses_a_file_as_its_output()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 12);
        string file = temp.File("taken.txt");
        File.WriteAllText(file, "mine");
        string expected = $"assay: {file}: is a file, not a folder; the output path names a folder to write (new, empty, or one this command wrote)";

        Check(() => ExtractCommand.Run(ExtractCommandTests.Request(input, file, "hidden"), TextWriter.Null, TextWriter.Null, CancellationToken.None));

        string run = temp.File("run");
        ExtractionRun.Execute(LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec)), input, run, new RunOptions());
        Check(() => ProbeCommand.Run(run, null, null, "cmean", file, 3, "1", TextWriter.Null));
        File.WriteAllLines(temp.File("v.txt"), ["0: lamp", "1: salt", "2: bell", "3: oar"]);
        Check(() => ZeroShotCommand.Run(Checkpoints.Folder(FeatureExtractorTests.Spec), input, temp.File("v.txt"), "{text} It is a", false,
            InputFormat.Auto, "text", "label", TextWriter.Null, file));
        Check(() => MergeCommand.Run([run, run], file, TextWriter.Null, TextWriter.Null));

        void Check(Func<int> body)
        {
            var err = new StringWriter();
            Assert.Equal(2, CommandRunner.Run(body, err));
            Assert.Equal(expected, err.ToString().TrimEnd());
            Assert.Equal("mine", File.ReadAllText(file));
        }
    }

    [Fact]
    public void Net_parameter_names_and_second_lines_never_reach_the_user() =>
        Assert.Equal("elements 5 … 9 are outside tensor 'w'",
            CommandRunner.Message(new ArgumentOutOfRangeException("first", 5, "elements 5 … 9 are outside tensor 'w'")));
}
