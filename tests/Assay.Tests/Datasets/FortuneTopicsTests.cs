using Assay.Datasets;

namespace Assay.Tests.Datasets;

/// <summary>The fortune-file reader against counts from outside the project.</summary>
public sealed class FortuneTopicsTests
{
    [Fact]
    public void Reads_the_17_topics_with_their_entry_counts()
    {
        Fortune[] all = FortuneTopics.Read().ToArray();   // Debian fortunes + fortunes-min; a missing file fails with the install command
        // Per-topic counts as measured in ../shared/DATA.md (7,625 in all).
        var expected = new Dictionary<string, int>
        {
            ["computers"] = 1_051, ["people"] = 1_251, ["politics"] = 703, ["science"] = 625, ["songs-poems"] = 720,
            ["work"] = 630, ["men-women"] = 582, ["art"] = 465, ["law"] = 206, ["drugs"] = 208, ["education"] = 203,
            ["food"] = 198, ["sports"] = 147, ["love"] = 150, ["kids"] = 150, ["medicine"] = 74, ["literature"] = 262,
        };
        Assert.Equal(expected, all.GroupBy(f => f.Topic).ToDictionary(g => g.Key, g => g.Count()));
        Assert.Equal(7_625, all.Length);
        // strfile's own count in each .dat file (big-endian uint32 at byte 4) agrees with the split on "%" lines.
        foreach (string topic in FortuneTopics.Topics)
        {
            Assert.Equal(FortuneTopics.RecordedCount(topic), FortuneTopics.RawEntryCount(topic));
        }
    }

    [Fact]
    public void Attribution_lines_are_stripped()
    {
        Fortune[] all = FortuneTopics.Read().ToArray();
        // A "-- Name" block ending a paragraph is removed. Entries still ending in an indented "-- " line are lists of such lines
        // (love entry 140 is one), which the rule cannot tell from attributions: measured 12 of 7,625; the bound is 1 %.
        int listLike = all.Count(f => System.Text.RegularExpressions.Regex.IsMatch(f.Text.Split('\n')[^1], @"^\s+--\s"));
        Assert.True(listLike < all.Length / 100, $"{listLike} entries still end in an attribution-like line");
        // Text that merely starts with a dash stays: art entry 1 loses its attribution, not its last sentence.
        Fortune heinlein = all.Single(f => f.Topic == "art" && f.Index == 1);
        Assert.EndsWith("\n-- he hates all creative people equally.", heinlein.Text, StringComparison.Ordinal);
        Assert.All(all, f => Assert.False(string.IsNullOrWhiteSpace(f.Text)));
    }
}
