using System.CommandLine;
using System.Text.RegularExpressions;

namespace Assay.Cli.Commands;

/// <summary>Parse errors in the command's own words: the option and value, and what was expected (no .NET type names).</summary>
internal static partial class Usage
{
    public static string Describe(string message)
    {
        Match m = CannotParse().Match(message);
        if (!m.Success)
        {
            return message.TrimEnd('.');
        }
        string value = m.Groups["value"].Value, option = m.Groups["option"].Value, type = m.Groups["type"].Value;
        string expected = type switch
        {
            _ when type.Contains("Int32", StringComparison.Ordinal) || type.Contains("Int64", StringComparison.Ordinal) => "a whole number",
            _ when type.Contains("Double", StringComparison.Ordinal) || type.Contains("Single", StringComparison.Ordinal) => "a number",
            _ when type.Contains("DirectoryInfo", StringComparison.Ordinal) => "a folder path",
            _ when type.Contains("FileInfo", StringComparison.Ordinal) => "a file path",
            _ => "another value",
        };
        return $"{option} {(value.Length == 0 ? "\"\"" : value)}: expected {expected}";
    }

    /// <summary>"assay extract", "assay manifest verify": the words that name a command.</summary>
    public static string CommandPath(Command command, Command root)
    {
        var names = new List<string>();
        for (Command? c = command; c != null && c != root; c = c.Parents.OfType<Command>().FirstOrDefault())
        {
            names.Insert(0, c.Name);
        }
        return string.Join(' ', ["assay", .. names]);
    }

    [GeneratedRegex(@"^Cannot parse argument '(?<value>.*)' for (?:option|command|argument) '(?<option>[^']*)' as expected type '(?<type>[^']*)'")]
    private static partial Regex CannotParse();
}
