namespace Assay.Fixtures;

/// <summary>
/// SplitMix64 (Steele, Lea and Flood, 2014) with Box–Muller normals: the same seed gives the same values on every
/// machine, so a checkpoint can be regenerated bit for bit instead of committed.
/// </summary>
public struct DeterministicRandom(ulong seed)
{
    private ulong _state = seed;

    public ulong NextUInt64()
    {
        ulong z = _state += 0x9E3779B97F4A7C15UL;
        z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL;
        z = (z ^ (z >> 27)) * 0x94D049BB133111EBUL;
        return z ^ (z >> 31);
    }

    /// <summary>Uniform in (0, 1]: 53 random bits.</summary>
    public double NextUnit() => ((NextUInt64() >> 11) + 1) * (1.0 / (1UL << 53));

    /// <summary>Fills with N(0, std²) values, rounded to float32.</summary>
    public void FillNormal(Span<float> values, double std, double mean = 0)
    {
        for (int i = 0; i < values.Length; i += 2)
        {
            double r = Math.Sqrt(-2.0 * Math.Log(NextUnit()));
            double theta = 2.0 * Math.PI * NextUnit();
            values[i] = (float)(mean + (std * r * Math.Cos(theta)));
            if (i + 1 < values.Length)
            {
                values[i + 1] = (float)(mean + (std * r * Math.Sin(theta)));
            }
        }
    }

    /// <summary>A per-name seed (FNV-1a over the name, mixed with the base seed), so values do not depend on order.</summary>
    public static ulong SeedFor(ulong baseSeed, string name)
    {
        ulong h = 14695981039346656037UL;
        foreach (char c in name)
        {
            h = (h ^ c) * 1099511628211UL;
        }
        return h ^ (baseSeed * 0x9E3779B97F4A7C15UL);
    }
}
