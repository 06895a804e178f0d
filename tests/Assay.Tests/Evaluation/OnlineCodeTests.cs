using System.Globalization;
using System.Text.Json;
using Assay.Evaluation;
using Assay.Fixtures;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>The online code against numpy's sum over the same probe predictions, and on tasks whose answer is known.</summary>
public sealed class OnlineCodeTests
{
    [Theory]
    [InlineData(0)]
    [InlineData(8)]
    public void Codelength_equals_numpys_from_the_same_predictions(int hidden)
    {
        (double[] x, string[] labels) = Data(1500, 6, 3, informative: true, seed: 1);
        ProbeKind kind = hidden == 0 ? ProbeKind.Linear : ProbeKind.Mlp(hidden);
        var p = new List<double>();
        var y = new List<double>();
        OnlineCodeResult r = OnlineCode.Measure(x, 1500, 6, labels, kind, 1.0, seed: 2, null, (rows, classes, probabilities) =>
        {
            p.AddRange(probabilities);
            y.AddRange(classes.Select(c => (double)c));
        });
        using var temp = new TempFolder();
        Npy.WriteFloat64(temp.File("p.npy"), [.. p], 3);
        Npy.WriteFloat64(temp.File("y.npy"), [.. y], 1);
        using JsonDocument np = JsonDocument.Parse(PythonReference.Run("online_code_numpy.py", temp.File("p.npy"), temp.File("y.npy"), "1500", "3"));
        JsonElement e = np.RootElement;
        Assert.Equal([.. e.GetProperty("ends").EnumerateArray().Select(v => v.GetInt32())], r.Blocks.Select(b => b.End));
        Assert.Equal(r.Blocks.Count, e.GetProperty("blocks").GetArrayLength());
        for (int b = 0; b < r.Blocks.Count; b++)
        {
            // The same terms summed in another order: 1e-9 relative (stated tolerance).
            Assert.Equal(e.GetProperty("blocks")[b].GetDouble(), r.Blocks[b].Bits, 1e-9 * Math.Max(1, r.Blocks[b].Bits));
        }
        Assert.Equal(e.GetProperty("codelength").GetDouble(), r.CodelengthBits, 1e-9 * r.CodelengthBits);
        Assert.Equal(e.GetProperty("uniform").GetDouble(), r.UniformBits, 1e-9);
        Assert.Equal(e.GetProperty("compression").GetDouble(), r.Compression, 1e-9);
        Assert.Equal(1500, r.Blocks[^1].End);
        Assert.Equal(1, r.Blocks[0].End); // 0.1 % of 1,500 rows
    }

    [Fact]
    public void Features_that_carry_the_label_compress_and_noise_does_not()
    {
        (double[] x, string[] labels) = Data(2000, 5, 4, informative: true, seed: 3);
        OnlineCodeResult informative = OnlineCode.Measure(x, 2000, 5, labels, ProbeKind.Linear, 1.0);
        (x, labels) = Data(2000, 5, 4, informative: false, seed: 4);
        OnlineCodeResult noise = OnlineCode.Measure(x, 2000, 5, labels, ProbeKind.Linear, 1.0);
        // Noise features: the labels cost about the uniform code (a little more, for what the probes overfit).
        Assert.True(informative.Compression > 2 && noise.Compression is > 0.9 and < 1.02,
            string.Create(CultureInfo.InvariantCulture, $"compression {informative.Compression} informative, {noise.Compression} noise"));
    }

    [Fact]
    public void Block_ends_follow_the_published_fractions()
    {
        Assert.Equal([4, 8, 16, 33, 66, 132, 259, 518, 1037, 2074, 4149], OnlineCode.BlockEnds(4149));
        Assert.Equal([1, 3, 6, 12, 25, 50, 100], OnlineCode.BlockEnds(100));
    }

    private static (double[] X, string[] Labels) Data(int n, int d, int classes, bool informative, ulong seed)
    {
        var rng = new DeterministicRandom(seed);
        double[] x = new double[n * d];
        string[] labels = new string[n];
        float[] noise = new float[d];
        for (int i = 0; i < n; i++)
        {
            int c = (int)(rng.NextUInt64() % (ulong)classes);
            rng.FillNormal(noise, 1.0);
            for (int f = 0; f < d; f++)
            {
                x[(i * d) + f] = noise[f] + (informative && f == c % d ? 2.5 : 0);
            }
            labels[i] = "c" + c.ToString(CultureInfo.InvariantCulture);
        }
        return (x, labels);
    }
}
