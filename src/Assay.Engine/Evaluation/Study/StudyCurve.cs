namespace Assay.Evaluation;

/// <summary>Test log loss against the models' cross-entropy for one prompt and feature kind, with the fitted curve.</summary>
public sealed record StudyCurve(string Prompt, string Feature, IReadOnlyList<(double CrossEntropy, double LogLoss)> Points, SquareRootFit Fit);
