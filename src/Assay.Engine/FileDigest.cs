using System.Security.Cryptography;

namespace Assay;

/// <summary>The SHA-256 of a file's contents, as the run records and study keys write it.</summary>
internal static class FileDigest
{
    /// <summary>Lower-case hexadecimal SHA-256 of the file at <paramref name="path"/>.</summary>
    public static string Sha256(string path) => Of(path).Sha256;

    /// <summary>The file's length and lower-case hexadecimal SHA-256, from one read.</summary>
    public static (long Bytes, string Sha256) Of(string path)
    {
        using FileStream file = InputFile.OpenRead(path, 1 << 20, FileOptions.SequentialScan);
        return (file.Length, Convert.ToHexStringLower(SHA256.HashData(file)));
    }
}
