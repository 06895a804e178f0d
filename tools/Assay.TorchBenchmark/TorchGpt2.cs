using Assay.Fixtures;
using Assay.Trainer;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.TorchBenchmark;

/// <summary>
/// The trainer's libtorch GPT-2 graph (<see cref="Gpt2Ops"/>) on a batch of equal-length sequences, its weights held
/// in float32 or bfloat16, with the output head at the last position only.
/// </summary>
internal sealed class TorchGpt2 : ITorchModel
{
    private readonly CheckpointSpec _spec;
    private readonly Dictionary<string, Tensor> _p;

    public TorchGpt2(CheckpointSpec spec, IEnumerable<StoredParameter> parameters, ScalarType type)
    {
        _spec = spec;
        _p = parameters.ToDictionary(sp => sp.Name, sp => tensor(sp.Values, sp.Shape).to_type(type));
    }

    /// <summary>Last-position logits (batch × vocabulary), computed under no_grad.</summary>
    public float[] Forward(long[] tokens, int batch, int length)
    {
        using var noGrad = no_grad();
        using var scope = NewDisposeScope();
        Tensor hidden = Gpt2Ops.FinalHidden(n => _p[n], _spec, tensor(tokens, [batch, length]));
        Tensor last = hidden.select(1, length - 1);
        Tensor logits = last.matmul(_p["wte.weight"].t());
        return logits.to_type(ScalarType.Float32).contiguous().data<float>().ToArray();
    }

    public void Dispose()
    {
        foreach (Tensor t in _p.Values)
        {
            t.Dispose();
        }
    }
}
