using System.Diagnostics;
using System.Text;
using System.Text.RegularExpressions;

namespace Assay.Datasets;

/// <summary>
/// The demo model's training text, one document per line, from public-domain sources in Debian packages
/// (../shared/DATA.md): Jane Austen's six novels (r-cran-janeaustenr, one paragraph a line), the King James Bible
/// (bible-kjv, one verse a line), the World English Bible (sword-text-web, one verse a line, notes and markup
/// dropped), and the definitions of the training half of WordNet's noun synsets (the other half is kept for the
/// labelled tasks and never appears here).
/// </summary>
internal static partial class Corpus
{
    [GeneratedRegex("<note[^>]*>.*?</note>", RegexOptions.Singleline)]
    private static partial Regex Note();

    [GeneratedRegex("<[^>]+>")]
    private static partial Regex Tag();

    [GeneratedRegex(@"\s+")]
    private static partial Regex Space();

    [GeneratedRegex(@"^\$\$\$(.+) (\d+):(\d+)$")]
    private static partial Regex VerseKey();

    /// <summary>Austen's novels from the package's lazy-load database: paragraphs are runs of non-empty lines.</summary>
    public static IEnumerable<string> Austen(string rdxPath)
    {
        foreach ((string _, string[] lines) in RLazyLoadDb.ReadCharacterVariables(rdxPath).OrderBy(v => v.Key, StringComparer.Ordinal))
        {
            var paragraph = new StringBuilder();
            foreach (string line in lines.Append(""))
            {
                if (line.Trim().Length == 0)
                {
                    if (paragraph.Length > 0)
                    {
                        yield return paragraph.ToString();
                        paragraph.Clear();
                    }
                    continue;
                }
                paragraph.Append(paragraph.Length > 0 ? " " : "").Append(line.Trim());
            }
        }
    }

    /// <summary>KJV verses through the package's <c>bible</c> command; the leading reference ("Ge1:1") is dropped.</summary>
    public static IEnumerable<string> KingJames() => Command("bible", "-f", "gen1:1-rev22:21")
        .Select(l => l.Trim()).Where(l => l.Length > 0).Select(l => l[(l.IndexOf(' ', StringComparison.Ordinal) + 1)..]);

    /// <summary>World English Bible verses through SWORD's <c>mod2imp</c>: verse 0 headings skipped, notes and tags dropped.</summary>
    public static IEnumerable<string> WorldEnglish()
    {
        bool verse = false;
        foreach (string line in Command("mod2imp", "engWEB2015eb"))
        {
            Match key = VerseKey().Match(line);
            if (key.Success)
            {
                verse = key.Groups[3].Value != "0";
                continue;
            }
            if (!verse || line.StartsWith("$$$", StringComparison.Ordinal))
            {
                verse = false;
                continue;
            }
            string text = Space().Replace(Tag().Replace(Note().Replace(line, " "), ""), " ").Trim();
            if (text.Length > 0)
            {
                yield return text;
            }
        }
    }

    private static IEnumerable<string> Command(string program, params string[] args)
    {
        var psi = new ProcessStartInfo(program) { RedirectStandardOutput = true, StandardOutputEncoding = Encoding.UTF8 };
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        Process p;
        try
        {
            p = Process.Start(psi)!;
        }
        catch (System.ComponentModel.Win32Exception e)
        {
            throw new FileNotFoundException($"{program} is not installed: apt-get install bible-kjv sword-text-web libsword-utils", program, e);
        }
        using (p)
        {
            string? line;
            while ((line = p.StandardOutput.ReadLine()) != null)
            {
                yield return line;
            }
            p.WaitForExit();
            if (p.ExitCode != 0)
            {
                throw new InvalidOperationException($"{program} {string.Join(' ', args)} exited {p.ExitCode}");
            }
        }
    }
}
