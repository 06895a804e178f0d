namespace Assay.Model;

/// <summary>What checking a checkpoint against its config found.</summary>
/// <param name="NamePrefix">The optional tensor-name prefix in use: "" or GPT-2's "transformer.".</param>
/// <param name="ParameterValues">Parameter values stored (a tied head stored as well counted once).</param>
/// <param name="SkippedBuffers">Stored buffers (causal masks, rotary tables), which are not parameters and are not loaded.</param>
public sealed record CheckpointSummary(string NamePrefix, long ParameterValues, int SkippedBuffers);
