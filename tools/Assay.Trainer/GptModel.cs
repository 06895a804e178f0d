using Assay.Fixtures;
using TorchSharp;
using TorchSharp.Modules;
using static TorchSharp.torch;

namespace Assay.Trainer;

/// <summary>
/// The GPT-2 architecture in libtorch ops, its parameters held under the published names and layouts (projection
/// weights [in, out], the head tied to the token embedding), so they are written out unchanged. Initialization as
/// published for GPT-2 (common practice): N(0, 0.02) for weights, zeros for biases, ones for norm gains, and the two
/// residual output projections of each block scaled by 1/√(2L).
/// </summary>
internal sealed class GptModel
{
    private readonly CheckpointSpec _spec;
    private readonly Dictionary<string, Parameter> _p = new(StringComparer.Ordinal);

    public GptModel(CheckpointSpec spec)
    {
        _spec = spec;
        double residualStd = 0.02 / Math.Sqrt(2 * spec.Layers);
        foreach (StoredParameter sp in SyntheticCheckpoint.Parameters(spec with { DType = "F32" }))
        {
            string n = sp.Name;
            Tensor init = n.EndsWith(".bias", StringComparison.Ordinal) ? zeros(sp.Shape)
                : n.Contains("ln_", StringComparison.Ordinal) ? ones(sp.Shape)
                : n.EndsWith("c_proj.weight", StringComparison.Ordinal) ? normal(0, residualStd, sp.Shape)
                : normal(0, 0.02, sp.Shape);
            _p[n] = new Parameter(init, requires_grad: true);
        }
    }

    public IEnumerable<Parameter> Parameters => _p.Values;

    /// <summary>Logits [B, T, V] of token windows [B, T].</summary>
    public Tensor Forward(Tensor tokens) => Gpt2Ops.FinalHidden(n => _p[n], _spec, tokens).matmul(_p["wte.weight"].t());

    /// <summary>Mean next-token cross-entropy (nats) of windows [B, T + 1].</summary>
    public Tensor Loss(Tensor windows)
    {
        long t = windows.shape[1] - 1;
        Tensor inputs = windows.narrow(1, 0, t), targets = windows.narrow(1, 1, t);
        Tensor logits = Forward(inputs);
        return nn.functional.cross_entropy(logits.reshape(-1, _spec.Vocabulary), targets.reshape(-1));
    }

    /// <summary>The parameters as float32 arrays under their names, in checkpoint order.</summary>
    public IEnumerable<StoredParameter> Export()
    {
        using var noGrad = no_grad();
        foreach ((string name, Parameter p) in _p)
        {
            Tensor c = p.detach().contiguous();
            yield return new StoredParameter(name, c.shape, c.data<float>().ToArray());
        }
    }
}
