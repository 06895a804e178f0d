namespace Assay.Evaluation;

/// <summary>One cell of a study: a feature kind of one model under one prompt, scored on the test texts.</summary>
/// <param name="Model">Model name.</param>
/// <param name="Prompt">Prompt name.</param>
/// <param name="Feature">Feature kind as the study file names it.</param>
/// <param name="Width">Features a row (0 for zero-shot).</param>
/// <param name="TrainRows">Rows the probe was fitted on (0 for zero-shot).</param>
/// <param name="InverseRegularization">C, the inverse regularization strength chosen by cross-validation (null for zero-shot).</param>
/// <param name="Score">Test accuracy with its bootstrap interval, log loss, macro-F1 and confusion.</param>
public sealed record StudyCell(string Model, string Prompt, string Feature, int Width, int TrainRows, double? InverseRegularization, ClassificationReport Score);
