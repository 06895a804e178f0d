using Assay.Config;

namespace Assay.Features;

/// <summary>What a feature kind's outputs depend on: the number of blocks L, the hidden width d and the vocabulary V.</summary>
internal readonly record struct ModelShape(int Layers, int Width, int VocabularySize)
{
    public static ModelShape Of(ModelConfig config) => new(config.Layers, config.Width, config.VocabularySize);
}
