namespace Assay.Model;

/// <summary>One file of a model folder with its size and SHA-256.</summary>
/// <param name="Name">The file name, relative to the folder.</param>
/// <param name="Bytes">The file's length.</param>
/// <param name="Sha256">Lower-case hexadecimal SHA-256 of the contents.</param>
public sealed record ModelFile(string Name, long Bytes, string Sha256)
{
    /// <summary>Every regular file directly in <paramref name="folder"/>, sorted by ordinal name, hashed.</summary>
    public static IReadOnlyList<ModelFile> Describe(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        var files = new List<ModelFile>();
        foreach (string path in Directory.GetFiles(folder).Order(StringComparer.Ordinal))
        {
            (long bytes, string sha) = FileDigest.Of(path);
            files.Add(new ModelFile(Path.GetFileName(path), bytes, sha));
        }
        return files;
    }
}
