using Assay.Fixtures;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.TorchBenchmark;

/// <summary>
/// The GPT-2 forward pass in libtorch ops (layer_norm, matmul, scaled_dot_product_attention, tanh GELU) on a batch of
/// equal-length sequences, with the output head at the last position only, in float32 or bfloat16.
/// </summary>
internal sealed class TorchGpt2 : IDisposable
{
    private readonly CheckpointSpec _spec;
    private readonly Dictionary<string, Tensor> _p;

    public TorchGpt2(CheckpointSpec spec, IEnumerable<StoredParameter> parameters, ScalarType type)
    {
        _spec = spec;
        _p = parameters.ToDictionary(sp => sp.Name, sp => tensor(sp.Values, sp.Shape).to_type(type));
        Type = type;
    }

    public ScalarType Type { get; }

    /// <summary>Bytes of the weights as held.</summary>
    public long WeightBytes => _p.Values.Sum(t => t.NumberOfElements * t.ElementSize);

    /// <summary>Last-position logits (batch × vocabulary), computed under no_grad.</summary>
    public float[] Forward(long[] tokens, int batch, int length)
    {
        using var noGrad = no_grad();
        using var scope = NewDisposeScope();
        long d = _spec.Width, h = _spec.Heads, hd = d / h;
        Tensor ids = tensor(tokens, [batch, length]);
        Tensor x = _p["wte.weight"].index_select(0, ids.flatten()).reshape(batch, length, d) + _p["wpe.weight"].narrow(0, 0, length);
        for (int l = 0; l < _spec.Layers; l++)
        {
            string b = $"h.{l}.";
            Tensor n1 = nn.functional.layer_norm(x, [d], _p[b + "ln_1.weight"], _p[b + "ln_1.bias"], 1e-5);
            Tensor qkv = n1.matmul(_p[b + "attn.c_attn.weight"]) + _p[b + "attn.c_attn.bias"];
            Tensor[] parts = qkv.split(d, -1);
            Tensor q = parts[0].reshape(batch, length, h, hd).transpose(1, 2);
            Tensor k = parts[1].reshape(batch, length, h, hd).transpose(1, 2);
            Tensor v = parts[2].reshape(batch, length, h, hd).transpose(1, 2);
            Tensor a = nn.functional.scaled_dot_product_attention(q, k, v, null, 0.0, true).transpose(1, 2).reshape(batch, length, d);
            x = x + a.matmul(_p[b + "attn.c_proj.weight"]) + _p[b + "attn.c_proj.bias"];
            Tensor n2 = nn.functional.layer_norm(x, [d], _p[b + "ln_2.weight"], _p[b + "ln_2.bias"], 1e-5);
            Tensor m = nn.functional.gelu(n2.matmul(_p[b + "mlp.c_fc.weight"]) + _p[b + "mlp.c_fc.bias"], TorchSharp.Modules.GELU.Approximate.tanh, false);
            x = x + m.matmul(_p[b + "mlp.c_proj.weight"]) + _p[b + "mlp.c_proj.bias"];
        }
        Tensor last = nn.functional.layer_norm(x.select(1, length - 1), [d], _p["ln_f.weight"], _p["ln_f.bias"], 1e-5);
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
