namespace Assay.Evaluation;

/// <summary>Everything a study measured.</summary>
/// <param name="Spec">The study.</param>
/// <param name="Classes">The task's labels, ordinal order (the probes' class order).</param>
/// <param name="Prior">The baseline without features: every test text given the training labels' frequencies (its accuracy is the majority class's share).</param>
/// <param name="Models">Each model with its cross-entropy.</param>
/// <param name="Cells">Every model × prompt × feature, in that order.</param>
/// <param name="Curves">Test log loss against cross-entropy for each prompt and probed feature (none with fewer than 3 distinct cross-entropies).</param>
/// <param name="Layers">With a layer sweep: a cell per model × prompt × layer (feature "layer:K"), in that order.</param>
/// <param name="Selectivity">With a control task: per model × prompt, the linear probe's and (with mlp) the MLP probe's.</param>
/// <param name="Comparisons">Per model × prompt, each pair the study file names.</param>
public sealed record StudyResult(StudySpec Spec, IReadOnlyList<string> Classes, ClassificationReport Prior, IReadOnlyList<StudyModel> Models,
    IReadOnlyList<StudyCell> Cells, IReadOnlyList<StudyCurve> Curves, IReadOnlyList<StudyCell> Layers, IReadOnlyList<StudySelectivity> Selectivity,
    IReadOnlyList<StudyComparison> Comparisons);
