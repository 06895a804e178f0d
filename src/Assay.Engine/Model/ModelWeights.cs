using Assay.Model.Blocks;
using Assay.Weights;

namespace Assay.Model;

/// <summary>
/// An opened model's parameters as the forward pass runs them: the input layer, the blocks in order, the final norm
/// and the output head, each converted and packed for the kernels by its family's layout (<see cref="CheckpointLayout"/>).
/// </summary>
internal sealed class ModelWeights(IEmbedding embedding, IReadOnlyList<ITransformerBlock> blocks, INorm finalNorm,
    OutputHead head, WeightPrecision precision, long headBytes)
{
    public IEmbedding Embedding { get; } = embedding;

    public IReadOnlyList<ITransformerBlock> Blocks { get; } = blocks;

    /// <summary>The norm after the last block, whose output is layer L and the head's input.</summary>
    public INorm FinalNorm { get; } = finalNorm;

    public OutputHead Head { get; } = head;

    /// <summary>Storage of the packed matrices.</summary>
    public WeightPrecision Precision { get; } = precision;

    /// <summary>Bytes every parameter takes in memory, packed (a head tied to the embedding counted once).</summary>
    public long Bytes => Embedding.Bytes + Blocks.Sum(b => b.Bytes) + FinalNorm.Bytes + headBytes;
}
