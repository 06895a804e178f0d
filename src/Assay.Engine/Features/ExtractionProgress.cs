namespace Assay.Features;

/// <summary>How far an extraction has come.</summary>
/// <param name="Rows">Texts whose forward pass is done.</param>
/// <param name="Tokens">Tokens run through the model, candidate completions included.</param>
/// <param name="Elapsed">Time since the extraction started.</param>
public readonly record struct ExtractionProgress(long Rows, long Tokens, TimeSpan Elapsed);
