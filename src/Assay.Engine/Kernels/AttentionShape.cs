namespace Assay.Kernels;

/// <summary>The heads of one attention layer: query heads, key/value heads (a divisor of the query heads), their width
/// and the sliding window (0 for none: every earlier position is seen).</summary>
internal readonly record struct AttentionShape(int Heads, int KeyValueHeads, int HeadWidth, int Window)
{
    /// <summary>Width of a fused [q | k | v] row.</summary>
    public int RowWidth => (Heads + (2 * KeyValueHeads)) * HeadWidth;
}
