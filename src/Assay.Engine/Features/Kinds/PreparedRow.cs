namespace Assay.Features;

/// <summary>A row's filled template: its tokens, how many text tokens were cut, and the position before {mark} (−1 without).</summary>
internal readonly record struct PreparedRow(int[] Tokens, int Truncated, int MarkPosition);
