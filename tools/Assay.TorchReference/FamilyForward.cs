using System.Text.Json;
using Assay.Fixtures;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.TorchReference;

/// <summary>
/// The rotary families' forward pass in libtorch ops, float64, from the published architecture descriptions:
/// Llama-style (llama, mistral, qwen2) — RMSNorm, rotary q/k (half-split; rope_scaling linear or llama3), grouped
/// key/value heads, causal attention within the sliding window, gated SiLU MLP; NeoX — LayerNorm, the fused per-head
/// q/k/v, partial rotary, exact GELU, parallel or sequential residual.
/// </summary>
internal static class FamilyForward
{
    public static (List<Tensor>[] Hidden, List<Tensor> Last) Run(CheckpointSpec s, Dictionary<string, Tensor> p, int[][] sequences)
    {
        var hidden = Enumerable.Range(0, s.Layers + 1).Select(_ => new List<Tensor>()).ToArray();
        var last = new List<Tensor>();
        using var noGrad = torch.no_grad();
        bool neox = s.Family == "gpt_neox";
        int rotary = neox ? (int)Math.Round(s.HeadWidth * s.RotaryPct) : s.HeadWidth;
        Tensor inv = Frequencies(rotary, s.RopeTheta, s.RopeScaling);
        Tensor embedding = neox ? p["gpt_neox.embed_in.weight"] : p["model.embed_tokens.weight"];
        Tensor head = s.Tied ? embedding : neox ? p["embed_out.weight"] : p["lm_head.weight"];
        foreach (int[] seq in sequences)
        {
            long t = seq.Length;
            Tensor x = embedding.index_select(0, tensor(seq.Select(i => (long)i).ToArray()));
            hidden[0].Add(x);
            Tensor angles = arange(t, ScalarType.Float64).unsqueeze(1) * inv.unsqueeze(0);
            Tensor cos = angles.cos(), sin = angles.sin();
            for (int l = 0; l < s.Layers; l++)
            {
                x = neox ? NeoXBlock(s, p, l, x, cos, sin) : LlamaBlock(s, p, l, x, cos, sin);
                if (l + 1 < s.Layers)
                {
                    hidden[l + 1].Add(x);
                }
            }
            Tensor y = neox
                ? nn.functional.layer_norm(x, [s.Width], p["gpt_neox.final_layer_norm.weight"], p["gpt_neox.final_layer_norm.bias"], 1e-5)
                : RmsNorm(x, p["model.norm.weight"]);
            hidden[s.Layers].Add(y);
            last.Add(y[^1].matmul(head.t()));
        }
        return (hidden, last);
    }

    private static Tensor LlamaBlock(CheckpointSpec s, Dictionary<string, Tensor> p, int l, Tensor x, Tensor cos, Tensor sin)
    {
        string b = $"model.layers.{l}.";
        long t = x.shape[0], h = s.Heads, kv = s.KvHeads, hd = s.HeadWidth;
        Tensor n1 = RmsNorm(x, p[b + "input_layernorm.weight"]);
        Tensor Project(string name, long heads)
        {
            Tensor y = nn.functional.linear(n1, p[b + $"self_attn.{name}_proj.weight"], p.GetValueOrDefault(b + $"self_attn.{name}_proj.bias"));
            return y.reshape(t, heads, hd).transpose(0, 1);
        }
        Tensor q = Rotate(Project("q", h), cos, sin), k = Rotate(Project("k", kv), cos, sin), v = Project("v", kv);
        k = k.repeat_interleave(h / kv, 0);
        v = v.repeat_interleave(h / kv, 0);
        bool sliding = s.SlidingWindow is int && (s.Family == "mistral" || (s.Family == "qwen2" && s.MaxWindowLayers is int first && l >= first));
        Tensor a = Attend(q, k, v, sliding ? s.SlidingWindow!.Value : 0).transpose(0, 1).reshape(t, h * hd);
        x = x + nn.functional.linear(a, p[b + "self_attn.o_proj.weight"]);
        Tensor n2 = RmsNorm(x, p[b + "post_attention_layernorm.weight"]);
        Tensor gated = nn.functional.silu(nn.functional.linear(n2, p[b + "mlp.gate_proj.weight"])) * nn.functional.linear(n2, p[b + "mlp.up_proj.weight"]);
        return x + nn.functional.linear(gated, p[b + "mlp.down_proj.weight"]);
    }

    private static Tensor NeoXBlock(CheckpointSpec s, Dictionary<string, Tensor> p, int l, Tensor x, Tensor cos, Tensor sin)
    {
        string b = $"gpt_neox.layers.{l}.";
        long t = x.shape[0], h = s.Heads, hd = s.HeadWidth, d = s.Width;
        Tensor Attention(Tensor n)
        {
            Tensor qkv = nn.functional.linear(n, p[b + "attention.query_key_value.weight"], p[b + "attention.query_key_value.bias"]).reshape(t, h, 3 * hd);
            Tensor q = Rotate(qkv.narrow(2, 0, hd).transpose(0, 1), cos, sin);
            Tensor k = Rotate(qkv.narrow(2, hd, hd).transpose(0, 1), cos, sin);
            Tensor v = qkv.narrow(2, 2 * hd, hd).transpose(0, 1);
            Tensor a = Attend(q, k, v, 0).transpose(0, 1).reshape(t, d);
            return nn.functional.linear(a, p[b + "attention.dense.weight"], p[b + "attention.dense.bias"]);
        }
        Tensor Mlp(Tensor n)
        {
            Tensor up = nn.functional.linear(n, p[b + "mlp.dense_h_to_4h.weight"], p[b + "mlp.dense_h_to_4h.bias"]);
            Tensor act = s.Activation == "gelu" ? nn.functional.gelu(up) : nn.functional.gelu(up, TorchSharp.Modules.GELU.Approximate.tanh, false);
            return nn.functional.linear(act, p[b + "mlp.dense_4h_to_h.weight"], p[b + "mlp.dense_4h_to_h.bias"]);
        }
        Tensor LayerNorm(Tensor y, string name) => nn.functional.layer_norm(y, [d], p[b + name + ".weight"], p[b + name + ".bias"], 1e-5);
        if (s.ParallelResidual)
        {
            return x + Attention(LayerNorm(x, "input_layernorm")) + Mlp(LayerNorm(x, "post_attention_layernorm"));
        }
        x = x + Attention(LayerNorm(x, "input_layernorm"));
        return x + Mlp(LayerNorm(x, "post_attention_layernorm"));
    }

    /// <summary>x · rsqrt(mean(x²) + ε) · g, ε = 1e-6 as the fixtures write it.</summary>
    private static Tensor RmsNorm(Tensor x, Tensor g) => x * (x.pow(2).mean([-1L], keepdim: true) + 1e-6).rsqrt() * g;

    /// <summary>Half-split rotation of the first 2·|θ| dimensions of [heads, T, hd]; the rest passes.</summary>
    private static Tensor Rotate(Tensor x, Tensor cos, Tensor sin)
    {
        long half = cos.shape[1], hd = x.shape[2];
        Tensor a = x.narrow(2, 0, half), b = x.narrow(2, half, half);
        var parts = new List<Tensor> { (a * cos) - (b * sin), (b * cos) + (a * sin) };
        if (2 * half < hd)
        {
            parts.Add(x.narrow(2, 2 * half, hd - (2 * half)));
        }
        return cat(parts, 2);
    }

    /// <summary>softmax(q·kᵀ/√hd) · v over keys s ≤ t (and s &gt; t − window when window &gt; 0), by scaled_dot_product_attention.</summary>
    private static Tensor Attend(Tensor q, Tensor k, Tensor v, int window)
    {
        if (window == 0)
        {
            return nn.functional.scaled_dot_product_attention(q, k, v, null, 0.0, true);
        }
        long t = q.shape[1];
        Tensor i = arange(t).unsqueeze(1), j = arange(t).unsqueeze(0);
        Tensor allowed = j.le(i).logical_and(j.gt(i - window));
        return nn.functional.scaled_dot_product_attention(q, k, v, allowed, 0.0, false);
    }

    /// <summary>θ_i = base^(−2i/r), then rope_scaling (linear: θ/factor; llama3: the published wavelength rule), float64.</summary>
    private static Tensor Frequencies(int rotary, double theta, string? scaling)
    {
        Tensor inv = pow(theta, -arange(0, rotary, 2, ScalarType.Float64) / rotary);
        if (scaling is null)
        {
            return inv;
        }
        using JsonDocument doc = JsonDocument.Parse(scaling);
        JsonElement r = doc.RootElement;
        string kind = (r.TryGetProperty("rope_type", out JsonElement k) ? k : r.GetProperty("type")).GetString()!;
        double factor = r.GetProperty("factor").GetDouble();
        if (kind == "linear")
        {
            return inv / factor;
        }
        double low = r.GetProperty("low_freq_factor").GetDouble(), high = r.GetProperty("high_freq_factor").GetDouble();
        double old = r.GetProperty("original_max_position_embeddings").GetDouble();
        Tensor wavelength = 2 * Math.PI / inv;
        Tensor smooth = ((old / wavelength) - low) / (high - low);
        Tensor mid = ((1 - smooth) * inv / factor) + (smooth * inv);
        return where(wavelength.lt(old / high), inv, where(wavelength.gt(old / low), inv / factor, mid));
    }
}
