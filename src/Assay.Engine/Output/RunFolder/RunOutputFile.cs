namespace Assay.Output;

/// <summary>One feature file of a finished run: its file name, NumPy dtype, rows and width.</summary>
public sealed record RunOutputFile(string File, string DType, long Rows, int Width);
