using Assay.Fixtures;

namespace Assay.Tests.Support;

/// <summary>Synthetic checkpoints written once per test process and shared, keyed by their spec.</summary>
public static class Checkpoints
{
    private static readonly string Root = Path.Combine(Path.GetTempPath(), "assay-tests-checkpoints-" + Environment.ProcessId);
    private static readonly Dictionary<CheckpointSpec, string> Written = [];
    private static readonly Lock Gate = new();

    static Checkpoints()
    {
        AppDomain.CurrentDomain.ProcessExit += (_, _) =>
        {
            try
            {
                Directory.Delete(Root, recursive: true);
            }
            catch (IOException)
            {
                // Best effort cleanup.
            }
        };
    }

    public static string Folder(CheckpointSpec spec)
    {
        lock (Gate)
        {
            if (!Written.TryGetValue(spec, out string? folder))
            {
                folder = Path.Combine(Root, "m" + Written.Count.ToString(System.Globalization.CultureInfo.InvariantCulture));
                SyntheticCheckpoint.Write(spec, folder);
                Written.Add(spec, folder);
            }
            return folder;
        }
    }
}
