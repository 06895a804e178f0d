using Assay.Fixtures;
using TorchSharp;
using static TorchSharp.torch;

namespace Assay.Trainer;

/// <summary>
/// The GPT-2 forward pass in libtorch ops — layer_norm, matmul, causal scaled_dot_product_attention, tanh GELU — on
/// parameters looked up by their published names and layouts (projection weights [in, out]). Shared by the trainer and
/// the libtorch benchmark (linked source), so both run the same graph.
/// </summary>
internal static class Gpt2Ops
{
    /// <summary>The final hidden states [B, T, d] (after the last LayerNorm) of token windows [B, T].</summary>
    public static Tensor FinalHidden(Func<string, Tensor> p, CheckpointSpec spec, Tensor tokens)
    {
        long b = tokens.shape[0], t = tokens.shape[1], d = spec.Width, h = spec.Heads, hd = d / h;
        Tensor x = p("wte.weight").index_select(0, tokens.reshape(-1)).reshape(b, t, d) + p("wpe.weight").narrow(0, 0, t);
        for (int l = 0; l < spec.Layers; l++)
        {
            string k = $"h.{l}.";
            Tensor n1 = nn.functional.layer_norm(x, [d], p(k + "ln_1.weight"), p(k + "ln_1.bias"), 1e-5);
            Tensor qkv = n1.matmul(p(k + "attn.c_attn.weight")) + p(k + "attn.c_attn.bias");
            Tensor[] parts = qkv.split(d, -1);
            Tensor q = parts[0].reshape(b, t, h, hd).transpose(1, 2);
            Tensor kk = parts[1].reshape(b, t, h, hd).transpose(1, 2);
            Tensor v = parts[2].reshape(b, t, h, hd).transpose(1, 2);
            Tensor a = nn.functional.scaled_dot_product_attention(q, kk, v, null, 0.0, true).transpose(1, 2).reshape(b, t, d);
            x = x + a.matmul(p(k + "attn.c_proj.weight")) + p(k + "attn.c_proj.bias");
            Tensor n2 = nn.functional.layer_norm(x, [d], p(k + "ln_2.weight"), p(k + "ln_2.bias"), 1e-5);
            Tensor mlp = nn.functional.gelu(n2.matmul(p(k + "mlp.c_fc.weight")) + p(k + "mlp.c_fc.bias"), TorchSharp.Modules.GELU.Approximate.tanh, false);
            x = x + mlp.matmul(p(k + "mlp.c_proj.weight")) + p(k + "mlp.c_proj.bias");
        }
        return nn.functional.layer_norm(x, [d], p("ln_f.weight"), p("ln_f.bias"), 1e-5);
    }
}
