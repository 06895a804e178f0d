namespace Assay.Features;

/// <summary>The arrays of one row, indexed by output.</summary>
internal readonly struct RowOutputs(float[]?[] values, int[]?[] ids)
{
    public float[] Values(int output) => values[output]!;

    public int[] Ids(int output) => ids[output]!;
}
