namespace Assay.Tests.Support;

public static class Tolerance
{
    /// <summary>Asserts |actual − expected| ≤ atol + rtol·|expected| elementwise, reporting the worst element.</summary>
    public static void AssertClose(ReadOnlySpan<float> actual, ReadOnlySpan<double> expected, double atol, double rtol, string what)
    {
        Assert.Equal(expected.Length, actual.Length);
        double worst = 0;
        int at = -1;
        for (int i = 0; i < actual.Length; i++)
        {
            double excess = Math.Abs(actual[i] - expected[i]) - (atol + (rtol * Math.Abs(expected[i])));
            if (double.IsNaN(actual[i]) || excess > worst)
            {
                worst = double.IsNaN(actual[i]) ? double.PositiveInfinity : excess;
                at = i;
            }
        }
        Assert.True(at < 0, at < 0 ? "" :
            $"{what}: element {at} is {actual[at]}, expected {expected[at]} (atol {atol}, rtol {rtol})");
    }

    public static double MaxAbsDifference(ReadOnlySpan<float> actual, ReadOnlySpan<double> expected)
    {
        double m = 0;
        for (int i = 0; i < actual.Length; i++)
        {
            m = Math.Max(m, Math.Abs(actual[i] - expected[i]));
        }
        return m;
    }
}
