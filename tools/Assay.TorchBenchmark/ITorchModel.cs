namespace Assay.TorchBenchmark;

/// <summary>A libtorch forward pass the benchmark times next to the engine's.</summary>
internal interface ITorchModel : IDisposable
{
    /// <summary>Last-position logits (batch × vocabulary) of equal-length sequences laid end to end, under no_grad.</summary>
    float[] Forward(long[] tokens, int batch, int length);
}
