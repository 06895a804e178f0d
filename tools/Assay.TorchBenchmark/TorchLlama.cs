using Assay.Fixtures;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.TorchBenchmark;

/// <summary>
/// A Llama-style forward pass in libtorch ops on a batch of equal-length sequences (RMSNorm from mean/rsqrt, half-split
/// rotary from cos/sin, grouped key/value heads by repeat_interleave, causal scaled_dot_product_attention, silu-gated
/// MLP), weights in float32 or bfloat16, the head at the last position only.
/// </summary>
internal sealed class TorchLlama : ITorchModel
{
    private readonly CheckpointSpec _spec;
    private readonly Dictionary<string, Tensor> _p;
    private readonly ScalarType _type;

    public TorchLlama(CheckpointSpec spec, IEnumerable<StoredParameter> parameters, ScalarType type)
    {
        _spec = spec;
        _type = type;
        _p = parameters.ToDictionary(sp => sp.Name, sp => tensor(sp.Values, sp.Shape).to_type(type));
    }

    /// <summary>Last-position logits (batch × vocabulary), computed under no_grad.</summary>
    public float[] Forward(long[] tokens, int batch, int length)
    {
        using var noGrad = no_grad();
        using var scope = NewDisposeScope();
        CheckpointSpec s = _spec;
        long h = s.Heads, kv = s.KvHeads, hd = s.HeadWidth;
        Tensor inv = pow(s.RopeTheta, -arange(0, hd, 2, ScalarType.Float64) / hd);
        Tensor angles = arange(length, ScalarType.Float64).unsqueeze(1) * inv.unsqueeze(0);
        Tensor cos = angles.cos().to_type(_type), sin = angles.sin().to_type(_type);
        Tensor x = _p["model.embed_tokens.weight"].index_select(0, tensor(tokens)).reshape(batch, length, s.Width);
        for (int l = 0; l < s.Layers; l++)
        {
            string b = $"model.layers.{l}.";
            Tensor n = RmsNorm(x, _p[b + "input_layernorm.weight"]);
            Tensor Heads(string name, long count) =>
                nn.functional.linear(n, _p[b + $"self_attn.{name}_proj.weight"]).reshape(batch, length, count, hd).transpose(1, 2);
            Tensor q = Rotate(Heads("q", h), cos, sin), k = Rotate(Heads("k", kv), cos, sin), v = Heads("v", kv);
            k = k.repeat_interleave(h / kv, 1);
            v = v.repeat_interleave(h / kv, 1);
            Tensor a = nn.functional.scaled_dot_product_attention(q, k, v, null, 0.0, true).transpose(1, 2).reshape(batch, length, h * hd);
            x = x + nn.functional.linear(a, _p[b + "self_attn.o_proj.weight"]);
            Tensor n2 = RmsNorm(x, _p[b + "post_attention_layernorm.weight"]);
            Tensor gated = nn.functional.silu(nn.functional.linear(n2, _p[b + "mlp.gate_proj.weight"])) * nn.functional.linear(n2, _p[b + "mlp.up_proj.weight"]);
            x = x + nn.functional.linear(gated, _p[b + "mlp.down_proj.weight"]);
        }
        Tensor last = RmsNorm(x, _p["model.norm.weight"]).select(1, length - 1);
        Tensor head = s.Tied ? _p["model.embed_tokens.weight"] : _p["lm_head.weight"];
        return last.matmul(head.t()).to_type(ScalarType.Float32).contiguous().data<float>().ToArray();
    }

    private static Tensor RmsNorm(Tensor x, Tensor g) => x * (x.pow(2).mean([-1L], keepdim: true) + 1e-6).rsqrt() * g;

    private static Tensor Rotate(Tensor x, Tensor cos, Tensor sin)
    {
        long half = cos.shape[1];
        Tensor a = x.narrow(3, 0, half), b = x.narrow(3, half, half);
        return cat([(a * cos) - (b * sin), (b * cos) + (a * sin)], 3);
    }

    public void Dispose()
    {
        foreach (Tensor t in _p.Values)
        {
            t.Dispose();
        }
    }
}
