using Assay.Datasets;

namespace Assay.Tests.Datasets;

/// <summary>The WordNet noun reader against counts from outside the project.</summary>
public sealed class WordNetNounsTests
{
    [Fact]
    public void Reads_every_noun_synset_with_its_supersense()
    {
        NounSynset[] all = WordNetNouns.Read().ToArray();   // Debian wordnet-base; a missing file fails with the install command
        // 82,115 noun synsets: the published WordNet 3.0 figure.
        Assert.Equal(82_115, all.Length);
        // Per-supersense counts as measured in ../shared/DATA.md (parsing the same Debian files independently).
        var expected = new Dictionary<string, int>
        {
            ["artifact"] = 11_587, ["person"] = 11_087, ["plant"] = 8_030, ["animal"] = 7_509, ["act"] = 6_650,
            ["communication"] = 5_607, ["state"] = 3_544, ["location"] = 3_209, ["attribute"] = 3_039, ["substance"] = 2_983,
            ["cognition"] = 2_964, ["group"] = 2_624, ["food"] = 2_573, ["body"] = 2_016, ["object"] = 1_545,
            ["quantity"] = 1_275, ["event"] = 1_074, ["possession"] = 1_061, ["time"] = 1_028, ["process"] = 770,
            ["phenomenon"] = 641, ["relation"] = 437, ["feeling"] = 428, ["shape"] = 341, ["Tops"] = 51, ["motive"] = 42,
        };
        Assert.Equal(expected, all.GroupBy(s => s.Supersense).ToDictionary(g => g.Key, g => g.Count()));
        NounSynset entity = all[0];
        Assert.Equal(("00001740", "Tops", "entity"), (entity.Offset, entity.Supersense, entity.FirstWord));
        Assert.Equal("that which is perceived or known or inferred to have its own distinct existence (living or nonliving)", entity.Definition);
        Assert.DoesNotContain(all, s => s.Definition.Contains("; \"", StringComparison.Ordinal) || s.Definition.Length == 0);
    }

    [Fact]
    public void The_split_is_fixed_and_about_half()
    {
        string[] offsets = WordNetNouns.Read().Select(s => s.Offset).ToArray();
        int evaluation = offsets.Count(o => WordNetNouns.Split(o).Evaluation);
        Assert.InRange(evaluation, 40_000, 42_100);
        Assert.Equal(WordNetNouns.Split("00001740"), WordNetNouns.Split("00001740"));
    }
}
