namespace Assay.Evaluation;

/// <summary>
/// Where a study is: step <paramref name="Index"/> of <paramref name="Count"/> (a model's cross-entropy, one extraction
/// run, or one cell), and within it <paramref name="Done"/> of <paramref name="Total"/> units.
/// </summary>
/// <param name="Index">The step, 1-based.</param>
/// <param name="Count">Steps in the whole study (kept steps included).</param>
/// <param name="Step">What the step computes, e.g. "final/kind-of/train" or "final/kind-of/cmean".</param>
/// <param name="Done">Units done in this step.</param>
/// <param name="Total">Units in this step.</param>
/// <param name="Unit">What a unit is: "texts", "rows" or "C values".</param>
/// <param name="Tokens">Tokens run through the model in this step so far (0 for a probe).</param>
/// <param name="Elapsed">Time since the step began.</param>
public readonly record struct StudyProgress(int Index, int Count, string Step, long Done, long Total, string Unit, long Tokens, TimeSpan Elapsed);
