namespace Assay.Output;

/// <summary>The output folder holds something a run must not touch or cannot continue; the message says what to pass.</summary>
public sealed class RunFolderException : InvalidInputException
{
    /// <summary>Creates the exception.</summary>
    public RunFolderException(string folder, string problem)
        : base(folder, $"{folder}: {problem}")
    {
    }
}
