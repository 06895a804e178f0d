using System.Text;

namespace Assay.Features;

/// <summary>
/// A prompt around each text: literal pieces, exactly one <c>{text}</c> and at most one <c>{mark}</c>, e.g.
/// <c>"Definition: {text} This definition describes a kind of"</c>. <c>{{</c> and <c>}}</c> stand for literal braces.
/// Each piece is tokenized on its own and the ids are laid end to end, so the text can be cut at a token boundary
/// without touching the prompt. <c>{mark}</c> adds no tokens: it marks the token just before it, whose hidden
/// state the <see cref="HiddenPooling.Marked"/> pooling reads.
/// </summary>
public sealed class PromptTemplate
{
    private const string TextPlaceholder = "{text}";
    private const string MarkPlaceholder = "{mark}";

    private PromptTemplate(string source, IReadOnlyList<string> before, IReadOnlyList<string> after, int markIndex)
    {
        Source = source;
        Before = before;
        After = after;
        MarkIndex = markIndex;
    }

    /// <summary>The template as written.</summary>
    public string Source { get; }

    /// <summary>The bare text, with nothing around it.</summary>
    public static PromptTemplate TextOnly { get; } = Parse(TextPlaceholder);

    /// <summary>Whether the template has a <c>{mark}</c>.</summary>
    public bool HasMark => MarkIndex >= 0;

    /// <summary>Literal pieces before {text}, in order (split at {mark} when it is there).</summary>
    internal IReadOnlyList<string> Before { get; }

    /// <summary>Literal pieces after {text}, in order (split at {mark} when it is there).</summary>
    internal IReadOnlyList<string> After { get; }

    /// <summary>
    /// Where {mark} sits, counted in pieces of the sequence Before… {text} After… (the text counts as one piece):
    /// the mark follows piece MarkIndex − 1. −1 when there is no mark.
    /// </summary>
    internal int MarkIndex { get; }

    /// <summary>Parses a template.</summary>
    /// <exception cref="FormatException">No or several {text}, several {mark}, a {mark} with nothing before it, an
    /// unknown placeholder or an unmatched brace; the message gives the character position.</exception>
    public static PromptTemplate Parse(string template)
    {
        ArgumentNullException.ThrowIfNull(template);
        var before = new List<string>();
        var after = new List<string>();
        var literal = new StringBuilder();
        bool sawText = false;
        int markIndex = -1;
        int piecesSoFar = 0;

        void EndLiteral()
        {
            if (literal.Length > 0)
            {
                (sawText ? after : before).Add(literal.ToString());
                literal.Clear();
                piecesSoFar++;
            }
        }

        for (int i = 0; i < template.Length; i++)
        {
            char ch = template[i];
            if (ch == '{' && i + 1 < template.Length && template[i + 1] == '{')
            {
                literal.Append('{');
                i++;
            }
            else if (ch == '}' && i + 1 < template.Length && template[i + 1] == '}')
            {
                literal.Append('}');
                i++;
            }
            else if (ch == '{')
            {
                if (string.CompareOrdinal(template, i, TextPlaceholder, 0, TextPlaceholder.Length) == 0)
                {
                    if (sawText)
                    {
                        throw Error(template, i, "{text} appears twice; a template holds it once");
                    }
                    EndLiteral();
                    sawText = true;
                    piecesSoFar++;
                    i += TextPlaceholder.Length - 1;
                }
                else if (string.CompareOrdinal(template, i, MarkPlaceholder, 0, MarkPlaceholder.Length) == 0)
                {
                    if (markIndex >= 0)
                    {
                        throw Error(template, i, "{mark} appears twice; a template holds it at most once");
                    }
                    EndLiteral();
                    if (piecesSoFar == 0)
                    {
                        throw Error(template, i, "{mark} has nothing before it; it marks the token just before it");
                    }
                    markIndex = piecesSoFar;
                    i += MarkPlaceholder.Length - 1;
                }
                else
                {
                    int end = template.IndexOf('}', i);
                    string name = end < 0 ? template[i..] : template[i..(end + 1)];
                    throw Error(template, i, $"unknown placeholder {name}; use {{text}}, {{mark}}, or {{{{ and }}}} for literal braces");
                }
            }
            else if (ch == '}')
            {
                throw Error(template, i, "a lone }; write }} for a literal brace");
            }
            else
            {
                literal.Append(ch);
            }
        }
        EndLiteral();
        if (!sawText)
        {
            throw new FormatException($"prompt template \"{template}\" has no {{text}} placeholder for the input text");
        }
        return new PromptTemplate(template, before, after, markIndex);
    }

    private static FormatException Error(string template, int position, string problem) =>
        new($"prompt template \"{template}\", character {position + 1}: {problem}");
}
