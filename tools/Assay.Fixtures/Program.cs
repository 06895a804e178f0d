using Assay.Fixtures;

// assay-fixtures <out-dir> [demo|gpt2-small|llama-1b|llama-8b|tiny] [F32|F16|BF16]
// Writes a synthetic checkpoint folder with deterministic random weights (seed 1) in the published GPT-2 layout.
if (args.Length is < 1 or > 3)
{
    Console.Error.WriteLine("usage: assay-fixtures <out-dir> [demo|gpt2-small|llama-1b|llama-8b|tiny] [F32|F16|BF16]");
    return 2;
}
CheckpointSpec? spec = (args.Length > 1 ? args[1] : "demo") switch
{
    "demo" => CheckpointSpec.Demo,
    "gpt2-small" => CheckpointSpec.Gpt2Small,
    "llama-1b" => CheckpointSpec.Llama1B,
    "llama-8b" => CheckpointSpec.Llama8B,
    "tiny" => new CheckpointSpec(),
    _ => null,
};
if (spec is null)
{
    Console.Error.WriteLine($"assay-fixtures: unknown shape '{args[1]}'; expected demo, gpt2-small, llama-1b, llama-8b or tiny");
    return 2;
}
if (args.Length > 2)
{
    if (args[2] is not ("F32" or "F16" or "BF16"))
    {
        Console.Error.WriteLine($"assay-fixtures: unknown dtype '{args[2]}'; expected F32, F16 or BF16");
        return 2;
    }
    spec = spec with { DType = args[2] };
}
SyntheticCheckpoint.Write(spec, args[0]);
Console.WriteLine($"wrote {args[0]}: {spec.Layers} layers, width {spec.Width}, {spec.Heads} heads, context {spec.Context}, vocabulary {spec.Vocabulary}, {spec.DType}");
return 0;
