using System.Globalization;

namespace Assay;

/// <summary>
/// A value read from a file, as an error message or a listing shows it: whole up to 200 characters, else its first
/// 200 and its length, so a 30 MB tensor name or a 20 MB merges line never floods a terminal or a log.
/// </summary>
public static class Echo
{
    /// <summary>The longest value shown whole.</summary>
    public const int MaxChars = 200;

    /// <summary><paramref name="value"/>, cut to <paramref name="max"/> characters with its length when longer.</summary>
    public static string Of(string value, int max = MaxChars)
    {
        ArgumentNullException.ThrowIfNull(value);
        if (value.Length <= max)
        {
            return value;
        }
        int cut = char.IsHighSurrogate(value[max - 1]) ? max - 1 : max;
        return string.Create(CultureInfo.InvariantCulture, $"{value[..cut]}… ({value.Length:N0} characters)");
    }
}
