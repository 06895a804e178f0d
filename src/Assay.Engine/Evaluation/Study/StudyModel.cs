namespace Assay.Evaluation;

/// <summary>A model of a study with its cross-entropy on the study's test texts (no prompt).</summary>
public sealed record StudyModel(string Name, string Folder, CrossEntropyResult CrossEntropy);
