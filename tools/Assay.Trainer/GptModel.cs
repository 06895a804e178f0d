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
    public Tensor Forward(Tensor tokens)
    {
        long b = tokens.shape[0], t = tokens.shape[1], d = _spec.Width, h = _spec.Heads, hd = d / h;
        Tensor wte = _p["wte.weight"];
        Tensor x = wte.index_select(0, tokens.reshape(-1)).reshape(b, t, d) + _p["wpe.weight"].narrow(0, 0, t);
        for (int l = 0; l < _spec.Layers; l++)
        {
            string k = $"h.{l}.";
            Tensor n1 = nn.functional.layer_norm(x, [d], _p[k + "ln_1.weight"], _p[k + "ln_1.bias"], 1e-5);
            Tensor qkv = n1.matmul(_p[k + "attn.c_attn.weight"]) + _p[k + "attn.c_attn.bias"];
            Tensor[] parts = qkv.split(d, -1);
            Tensor q = parts[0].reshape(b, t, h, hd).transpose(1, 2);
            Tensor kk = parts[1].reshape(b, t, h, hd).transpose(1, 2);
            Tensor v = parts[2].reshape(b, t, h, hd).transpose(1, 2);
            Tensor a = nn.functional.scaled_dot_product_attention(q, kk, v, null, 0.0, true).transpose(1, 2).reshape(b, t, d);
            x = x + a.matmul(_p[k + "attn.c_proj.weight"]) + _p[k + "attn.c_proj.bias"];
            Tensor n2 = nn.functional.layer_norm(x, [d], _p[k + "ln_2.weight"], _p[k + "ln_2.bias"], 1e-5);
            Tensor mlp = nn.functional.gelu(n2.matmul(_p[k + "mlp.c_fc.weight"]) + _p[k + "mlp.c_fc.bias"], GELU.Approximate.tanh, false);
            x = x + mlp.matmul(_p[k + "mlp.c_proj.weight"]) + _p[k + "mlp.c_proj.bias"];
        }
        Tensor y = nn.functional.layer_norm(x, [d], _p["ln_f.weight"], _p["ln_f.bias"], 1e-5);
        return y.matmul(wte.t());
    }

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
