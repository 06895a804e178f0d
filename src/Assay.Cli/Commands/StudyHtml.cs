using System.Globalization;
using System.Net;
using System.Text;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using Assay.Evaluation;
using Assay.Model;

namespace Assay.Cli.Commands;

/// <summary>
/// The study's report.html: one self-contained page (styles inline, plots as data: URIs, nothing fetched) with the
/// tables of results.md, the plots, the study file as resolved, every model's files with their SHA-256, and what each
/// number means — readable offline, printable, and diffable as text.
/// </summary>
internal static partial class StudyHtml
{
    private static readonly CultureInfo Inv = CultureInfo.InvariantCulture;

    [GeneratedRegex(@"\*\*(.+?)\*\*")]
    private static partial Regex Bold();

    public static string Build(StudyResult r, string folder, string markdown)
    {
        // Paths as the study file writes them (relative to it), so the page says nothing of the machine it was made on.
        string beside = Path.GetDirectoryName(r.Spec.Path)!;
        string Relative(string path) => Path.GetRelativePath(beside, path);
        var h = new StringBuilder();
        string title = $"Study {Path.GetFileName(r.Spec.Path)}";
        h.Append("<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">")
            .Append("<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; img-src data:; style-src 'unsafe-inline'\">")
            .Append("<title>").Append(Encode(title)).Append("</title><style>")
            .Append("body{font-family:'DejaVu Sans',sans-serif;margin:2em auto;max-width:1100px;color:#1a1a1a;line-height:1.45}")
            .Append("table{border-collapse:collapse;margin:0.6em 0 1.4em}td,th{border:1px solid #bbb;padding:3px 8px}")
            .Append("td.n{text-align:right;font-variant-numeric:tabular-nums}th{background:#eef2f7}")
            .Append("img{max-width:100%;border:1px solid #ddd;margin:0.5em 0}pre{background:#f6f6f6;padding:0.8em;overflow-x:auto}")
            .Append("code{font-size:0.9em}h2{border-bottom:2px solid #1D3F6E;padding-bottom:2px}")
            .Append("</style></head><body>\n");
        h.Append("<h1>").Append(Encode(title)).Append("</h1>\n");
        MarkdownToHtml(h, markdown);

        h.Append("<h2>Plots</h2>\n");
        foreach ((string prompt, _) in r.Spec.Prompts)
        {
            foreach (string plot in new[] { StudyFolder.AccuracyPlot(prompt), StudyFolder.LossPlot(prompt), StudyFolder.LayersPlot(prompt) })
            {
                string path = Path.Combine(folder, plot);
                if (File.Exists(path))
                {
                    h.Append("<figure><img alt=\"").Append(Encode(plot)).Append("\" src=\"data:image/png;base64,")
                        .Append(Convert.ToBase64String(File.ReadAllBytes(path))).Append("\"><figcaption>").Append(Encode(plot)).Append("</figcaption></figure>\n");
                }
            }
        }

        h.Append("<h2>Models and their files</h2>\n");
        foreach (StudyModel m in r.Models)
        {
            h.Append("<h3>").Append(Encode(m.Name)).Append("</h3><p><code>").Append(Encode(Relative(m.Folder))).Append("</code>, cross-entropy ")
                .Append(m.CrossEntropy.NatsPerToken.ToString("F4", Inv)).Append(" nats/token on ").Append(m.CrossEntropy.Texts.ToString("N0", Inv)).Append(" test texts</p>\n")
                .Append("<table><tr><th>file</th><th>bytes</th><th>SHA-256</th></tr>\n");
            foreach (ModelFile f in ModelFile.Describe(m.Folder))
            {
                h.Append("<tr><td>").Append(Encode(f.Name)).Append("</td><td class=\"n\">").Append(f.Bytes.ToString("N0", Inv))
                    .Append("</td><td><code>").Append(f.Sha256).Append("</code></td></tr>\n");
            }
            h.Append("</table>\n");
        }

        h.Append("<h2>The study file, as resolved (paths relative to it)</h2>\n<pre>")
            .Append(Encode(RelativePaths(r.Spec.ToJson(), Relative).ToJsonString(JsonOutput.Options))).Append("</pre>\n");
        h.Append("<h2>What the numbers mean</h2>\n<dl>")
            .Append("<dt>accuracy (95 %)</dt><dd>the share of test texts whose most likely class is the true one; in brackets the 2.5th and 97.5th percentiles of 1,000 bootstrap resamples of the test texts (they cover the choice of test texts, not of training texts or seeds).</dd>")
            .Append("<dt>log loss</dt><dd>the mean of −ln p(true class) over the test texts, in nats (probabilities clipped at 10⁻¹⁵).</dd>")
            .Append("<dt>cross-entropy</dt><dd>the model's own next-token loss on the test texts without a prompt, in nats per token.</dd>")
            .Append("<dt>a + b·√(x − x₀), R²</dt><dd>a least-squares fit of test log loss against cross-entropy over the models, and the share of the loss's variance it explains; descriptive with few points.</dd>")
            .Append("<dt>layer</dt><dd>0 is the embedding sum, k the residual stream after block k, the last the output of the final norm; each probed at the last token.</dd>")
            .Append("<dt>control, floor, ceiling, selectivity</dt><dd>the same probe fitted on labels that are a fixed random function of each text's type; the floor is always its most frequent label, the ceiling a lookup table of the training types; selectivity is task accuracy minus control accuracy.</dd>")
            .Append("<dt>A − B (paired)</dt><dd>the difference of two feature kinds on the same test texts, with the percentile interval of 1,000 resamples that score both on the same rows, and the share of resamples in which A is ahead.</dd>")
            .Append("</dl>\n</body></html>\n");
        return h.ToString();
    }

    /// <summary>The JSON, changed in place: every rooted path string made relative by <paramref name="relative"/>.</summary>
    private static JsonNode RelativePaths(JsonNode node, Func<string, string> relative)
    {
        if (node is JsonObject o)
        {
            foreach ((string key, JsonNode? child) in o.ToList())
            {
                Replace(child, v => o[key] = v);
            }
        }
        else if (node is JsonArray a)
        {
            for (int i = 0; i < a.Count; i++)
            {
                int at = i;
                Replace(a[i], v => a[at] = v);
            }
        }
        return node;

        void Replace(JsonNode? child, Action<JsonNode> set)
        {
            if (child is JsonValue v && v.TryGetValue(out string? text) && Path.IsPathRooted(text))
            {
                set(JsonValue.Create(relative(text)));
            }
            else if (child != null)
            {
                RelativePaths(child, relative);
            }
        }
    }

    /// <summary>The Markdown that <see cref="StudyReport.Markdown"/> writes (paragraphs and pipe tables, ** for bold) as HTML.</summary>
    private static void MarkdownToHtml(StringBuilder h, string markdown)
    {
        bool inTable = false, header = false;
        foreach (string raw in markdown.Split('\n'))
        {
            string line = raw.TrimEnd();
            if (line.StartsWith('|'))
            {
                string[] cells = [.. line.Trim('|').Split('|').Select(c => c.Trim())];
                if (cells.All(c => c.Length > 0 && c.Trim('-', ':').Length == 0))
                {
                    continue; // the alignment row
                }
                if (!inTable)
                {
                    h.Append("<table>\n");
                    inTable = header = true;
                }
                h.Append("<tr>");
                foreach (string c in cells)
                {
                    string tag = header ? "th" : "td";
                    bool numeric = !header && c.Length > 0 && (char.IsDigit(c[0]) || c[0] is '+' or '-' or '*' or '−') && !c.Any(char.IsLetter);
                    h.Append('<').Append(tag).Append(numeric ? " class=\"n\">" : ">").Append(Inline(c)).Append("</").Append(tag).Append('>');
                }
                h.Append("</tr>\n");
                header = false;
                continue;
            }
            if (inTable)
            {
                h.Append("</table>\n");
                inTable = false;
            }
            if (line.Length > 0)
            {
                h.Append("<p>").Append(Inline(line.Replace("\\*", "*", StringComparison.Ordinal))).Append("</p>\n");
            }
        }
        if (inTable)
        {
            h.Append("</table>\n");
        }
    }

    private static string Inline(string text) => Bold().Replace(Encode(text), "<strong>$1</strong>");

    private static string Encode(string text) => WebUtility.HtmlEncode(text);
}
