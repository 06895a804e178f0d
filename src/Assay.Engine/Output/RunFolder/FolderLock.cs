using System.Globalization;

namespace Assay.Output;

/// <summary>
/// One writer per folder: an exclusive lock on <see cref="LockFile"/> in the folder, held while a run, a merge, a
/// probe or zero-shot report or a study writes there, with <see cref="WriterFile"/> beside it naming the holder
/// (process id, host, start time). A second writer is refused at once, naming the holder. Both files go when the lock
/// is released; if the holder is killed, the operating system releases the lock and the next writer takes the folder.
/// The lock is advisory: it keeps out other assay processes and library users, not other programs.
/// </summary>
public sealed class FolderLock : IDisposable
{
    /// <summary>The locked file.</summary>
    public const string LockFile = ".assay-lock";

    /// <summary>Who holds the lock: "process ID on HOST since TIME".</summary>
    public const string WriterFile = ".assay-writer";

    private readonly FileStream _stream;
    private readonly string _writer;

    private FolderLock(FileStream stream, string writer)
    {
        _stream = stream;
        _writer = writer;
    }

    /// <summary>An output path that names a file (or anything but a folder) is a mistake in the command, not a write failure.</summary>
    /// <exception cref="RunFolderException">The path exists and is not a folder.</exception>
    public static void RefuseFile(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        if (File.Exists(folder) || (!Directory.Exists(folder) && new FileInfo(folder).LinkTarget != null))
        {
            throw new RunFolderException(folder, "is a file, not a folder; the output path names a folder to write (new, empty, or one this command wrote)");
        }
    }

    /// <summary>Whether an entry of this name is the lock's, which every folder rule leaves alone.</summary>
    public static bool IsLockFile(string name) => name is LockFile or WriterFile;

    /// <summary>Takes the lock on <paramref name="folder"/> (created if missing).</summary>
    /// <exception cref="RunFolderException">Another process holds it, or the path is a file.</exception>
    public static FolderLock Acquire(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        RefuseFile(folder);
        Directory.CreateDirectory(folder);
        string path = Path.Combine(folder, LockFile);
        FileStream stream;
        try
        {
            stream = new FileStream(path, FileMode.OpenOrCreate, FileAccess.ReadWrite, FileShare.None, 1, FileOptions.DeleteOnClose);
        }
        catch (IOException e) when (IsHeld(e))
        {
            throw new RunFolderException(folder, $"is being written by {Holder(folder)}; wait for it to finish, or give another folder");
        }
        string writer = Path.Combine(folder, WriterFile);
        File.WriteAllText(writer, string.Create(CultureInfo.InvariantCulture,
            $"process {Environment.ProcessId} on {Environment.MachineName} since {DateTimeOffset.UtcNow:yyyy-MM-ddTHH:mm:ssZ}\n"));
        return new FolderLock(stream, writer);
    }

    /// <summary>Releases the lock: the writer file goes, then the lock file (deleted as it is closed).</summary>
    public void Dispose()
    {
        File.Delete(_writer);
        _stream.Dispose();
    }

    /// <summary>The lock is held elsewhere: EWOULDBLOCK from flock on Linux (11) and macOS (35), a sharing or lock violation on Windows.</summary>
    private static bool IsHeld(IOException e) => e.HResult is 11 or 35 or unchecked((int)0x80070020) or unchecked((int)0x80070021);

    private static string Holder(string folder)
    {
        try
        {
            string text = System.Text.Encoding.UTF8.GetString(InputFile.ReadAllBytes(Path.Combine(folder, WriterFile), 4096)).Trim();
            return text.Length is > 0 and <= 200 ? text : "another process";
        }
        catch (Exception e) when (e is IOException or InvalidInputException)
        {
            return "another process";
        }
    }
}
