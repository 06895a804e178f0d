using Assay.Features;

namespace Assay.Tests.Features;

public sealed class PromptTemplateTests
{
    [Fact]
    public void Splits_into_pieces_around_text_and_mark()
    {
        PromptTemplate t = PromptTemplate.Parse("Definition: {text}{mark} It is a kind of");
        Assert.Equal(["Definition: "], t.Before);
        Assert.Equal([" It is a kind of"], t.After);
        Assert.True(t.HasMark);
        Assert.Equal(2, t.MarkIndex);   // after the first literal and the text
    }

    [Fact]
    public void Double_braces_are_literal_braces()
    {
        PromptTemplate t = PromptTemplate.Parse("{{x}} {text} }}");
        Assert.Equal(["{x} "], t.Before);
        Assert.Equal([" }"], t.After);
        Assert.False(t.HasMark);
    }

    [Fact]
    public void Text_only_has_no_literals()
    {
        PromptTemplate t = PromptTemplate.TextOnly;
        Assert.Empty(t.Before);
        Assert.Empty(t.After);
    }

    [Theory]
    [InlineData("no placeholder", "no {text}")]
    [InlineData("{text} {text}", "{text} appears twice")]
    [InlineData("{text}{mark}{mark}", "{mark} appears twice")]
    [InlineData("{mark}{text}", "nothing before it")]
    [InlineData("{text} {label}", "unknown placeholder {label}")]
    [InlineData("{text} }", "a lone }")]
    public void Bad_templates_are_refused_with_the_reason(string template, string reason)
    {
        FormatException e = Assert.Throws<FormatException>(() => PromptTemplate.Parse(template));
        Assert.Contains(reason, e.Message, StringComparison.Ordinal);
    }
}
