using System.Globalization;
using Mono.Unix;

namespace Assay;

/// <summary>
/// How the engine opens every file it reads: the path, its symbolic links followed (a loop refused), must name a
/// regular file, checked before it is opened (a FIFO would block the open, a device such as /dev/zero would never
/// end), and a whole-file read is capped in size. Every refusal names the file.
/// </summary>
public static class InputFile
{
    /// <summary>The cap for small JSON and text files the engine reads whole (configs, indexes, records, verbalizers).</summary>
    public const long SmallFileBytes = 64L << 20;

    /// <summary>The cap for tokenizer files read whole (a 150,000-entry tokenizer.json is about 10 MB).</summary>
    public const long TokenizerFileBytes = 512L << 20;

    /// <summary>What <see cref="NotRegular"/> says of a FIFO, which text inputs accept as a stream.</summary>
    public const string Fifo = "a FIFO (named pipe)";

    /// <summary>What is at <paramref name="path"/>, links followed, when it is not a regular file; null when it is.</summary>
    /// <exception cref="InputFileException">A symbolic link loop, or the path cannot be examined.</exception>
    /// <exception cref="FileNotFoundException">Nothing is there (or a link's target is missing).</exception>
    public static string? NotRegular(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        string target = Resolve(path);
        if (Directory.Exists(target))
        {
            return "a folder";
        }
        if (!File.Exists(target))
        {
            throw new FileNotFoundException(target == path ? $"{path}: no such file" : $"{path}: a link to {target}, which does not exist", path);
        }
        if (OperatingSystem.IsWindows())
        {
            return (File.GetAttributes(target) & FileAttributes.Device) != 0 ? "a device" : null;
        }
        FileTypes type;
        try
        {
            type = UnixFileSystemInfo.GetFileSystemEntry(target).FileType;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or InvalidOperationException)
        {
            throw new InputFileException(path, $"{path}: cannot be examined ({e.Message})");
        }
        return type switch
        {
            FileTypes.RegularFile => null,
            FileTypes.Fifo => Fifo,
            FileTypes.CharacterDevice => "a character device",
            FileTypes.BlockDevice => "a block device",
            FileTypes.Socket => "a socket",
            _ => "not a regular file",
        };
    }

    /// <summary>Refuses anything but a regular file at <paramref name="path"/> (links followed).</summary>
    /// <exception cref="InputFileException">A loop, a folder, a FIFO, a device or a socket.</exception>
    /// <exception cref="FileNotFoundException">Nothing is there.</exception>
    public static void Check(string path)
    {
        if (NotRegular(path) is string what)
        {
            throw new InputFileException(path, $"{path}: {what}, not a regular file; the engine reads only regular files");
        }
    }

    /// <summary>A regular file's length, its links followed (a link's own FileInfo.Length is the link's).</summary>
    /// <exception cref="InputFileException">Not a regular file (see <see cref="Check"/>).</exception>
    public static long Length(string path)
    {
        Check(path);
        return new FileInfo(Resolve(path)).Length;
    }

    /// <summary>Opens a regular file for reading.</summary>
    /// <exception cref="InputFileException">Not a regular file (see <see cref="Check"/>).</exception>
    public static FileStream OpenRead(string path, int bufferSize = 4096, FileOptions options = FileOptions.None)
    {
        Check(path);
        return new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, bufferSize, options);
    }

    /// <summary>A regular file's bytes, refused when it is over <paramref name="maxBytes"/>.</summary>
    /// <exception cref="InputFileException">Not a regular file, or larger than the cap.</exception>
    public static byte[] ReadAllBytes(string path, long maxBytes = SmallFileBytes)
    {
        using FileStream file = OpenRead(path);
        long length = file.Length;
        if (length > maxBytes)
        {
            throw new InputFileException(path, string.Create(CultureInfo.InvariantCulture,
                $"{path}: {length:N0} bytes, more than the {maxBytes:N0} bytes this file may have"));
        }
        byte[] bytes = new byte[length];
        file.ReadExactly(bytes);
        return bytes;
    }

    /// <summary>The path with its symbolic links followed; a loop is refused.</summary>
    /// <exception cref="InputFileException">A symbolic link loop.</exception>
    internal static string Resolve(string path)
    {
        try
        {
            return File.ResolveLinkTarget(path, returnFinalTarget: true)?.FullName ?? path;
        }
        catch (IOException e)
        {
            // ELOOP ("Too many levels of symbolic links"): a loop in the link itself or in a folder on the way.
            throw new InputFileException(path, $"{path}: a symbolic link loop (the links never reach a file: {e.Message.TrimEnd('.')})");
        }
    }
}

/// <summary>A file the engine was asked to read is not a regular file, is too large, or cannot be examined.</summary>
public sealed class InputFileException : InvalidInputException
{
    internal InputFileException(string filePath, string message)
        : base(filePath, message)
    {
    }
}
