using System.Security.Cryptography;

namespace Assay;

/// <summary>The SHA-256 of a file's contents, as the run records and study keys write it.</summary>
internal static class FileDigest
{
    /// <summary>Lower-case hexadecimal SHA-256 of the file at <paramref name="path"/>.</summary>
    public static string Sha256(string path)
    {
        using FileStream file = InputFile.OpenRead(path);
        return Convert.ToHexStringLower(SHA256.HashData(file));
    }
}
