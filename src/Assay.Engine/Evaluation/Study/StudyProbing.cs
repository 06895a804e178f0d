namespace Assay.Evaluation;

/// <summary>The selectivity of one probe kind on the last layer's hidden state of one model under one prompt.</summary>
/// <param name="Model">Model name.</param>
/// <param name="Prompt">Prompt name.</param>
/// <param name="Result">The task and control scores.</param>
public sealed record StudySelectivity(string Model, string Prompt, SelectivityResult Result);

/// <summary>A paired bootstrap of two feature kinds of one model under one prompt, on the same test rows.</summary>
/// <param name="Model">Model name.</param>
/// <param name="Prompt">Prompt name.</param>
/// <param name="A">The first feature kind.</param>
/// <param name="B">The second.</param>
/// <param name="Result">A − B.</param>
public sealed record StudyComparison(string Model, string Prompt, string A, string B, PairedComparison Result);
