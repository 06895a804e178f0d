#!/usr/bin/python3
"""Independent forward pass of the rotary families in numpy (float64), the outside reference for their parity tests.

Written from the published architecture descriptions (common practice):
  Llama-style (model_type llama, mistral, qwen2): x = E[tokens]; per block
    h = rmsnorm(x) (x / sqrt(mean(x^2) + eps) * g); q = h Wq^T (+ bq), k = h Wk^T (+ bk), v = h Wv^T (+ bv);
    rotary on q and k: pairs (i, i + hd/2) rotated by p * theta_i, theta_i = base^(-2i/hd), rescaled by rope_scaling
    (linear: theta / factor; llama3: the published wavelength rule); query head j reads kv head j // (H / KV);
    causal softmax(q k^T / sqrt(hd)), within the last sliding_window keys (itself included) where set;
    x += attn Wo^T; h = rmsnorm(x); x += (silu(h Wg^T) * (h Wu^T)) Wd^T. Final rmsnorm; logits = y E^T or lm_head.
  NeoX (model_type gpt_neox): x = embed_in[tokens]; per block the fused qkv = ln1(x) W^T + b viewed as
    [T, heads, 3 * hd] (q, k, v per head); rotary on the first rotary_pct * hd dims of each head (half-split within
    them); attn = dense(...); mlp = dense_4h_to_h(act(dense_h_to_4h(ln2(.)))); parallel: x = x + attn(ln1(x)) +
    mlp(ln2(x)); sequential: x = x + attn(ln1(x)); x = x + mlp(ln2(x)). Final LayerNorm; logits = y embed_out^T.

usage: decoder_numpy.py MODEL_DIR SEQUENCES_JSON OUT_DIR [--all-logits]
writes hidden_{k}.npy ([T, d], k = 0 .. L, layer 0 the token embeddings), logits_last.npy ([B, V]),
p_last.npy (softmax of the last logits, [B, V]), cmean_last.npy (p_last @ head, the conditional mean of the output
embeddings, [B, d]) and with --all-logits logits_all.npy ([T, V]), all float64.
"""
import json
import math
import os
import sys

import numpy as np

from gpt2_numpy import activation, layer_norm, read_checkpoint


def rms_norm(x, g, eps):
    return x / np.sqrt((x * x).mean(axis=-1, keepdims=True) + eps) * g


def frequencies(rotary_dims, base, scaling):
    inv = 1.0 / base ** (np.arange(0, rotary_dims, 2, dtype=np.float64) / rotary_dims)
    if not scaling:
        return inv
    kind = scaling.get("rope_type", scaling.get("type"))
    if kind == "linear":
        return inv / scaling["factor"]
    if kind == "llama3":
        factor, low_f, high_f = scaling["factor"], scaling["low_freq_factor"], scaling["high_freq_factor"]
        old = scaling["original_max_position_embeddings"]
        wavelen = 2 * math.pi / inv
        low_wavelen, high_wavelen = old / low_f, old / high_f
        smooth = (old / wavelen - low_f) / (high_f - low_f)
        mid = (1 - smooth) * inv / factor + smooth * inv
        return np.where(wavelen < high_wavelen, inv, np.where(wavelen > low_wavelen, inv / factor, mid))
    raise ValueError(kind)


def rotate(x, inv):
    """x: [heads, T, hd]; rotates the first 2 * len(inv) dims of each head, half-split, positions 0 .. T-1."""
    r = 2 * len(inv)
    T = x.shape[1]
    ang = np.arange(T, dtype=np.float64)[:, None] * inv[None, :]
    cos, sin = np.cos(ang), np.sin(ang)
    a, b, rest = x[..., : r // 2], x[..., r // 2 : r], x[..., r:]
    return np.concatenate([a * cos - b * sin, b * cos + a * sin, rest], axis=-1)


def attention(q, k, v, window):
    """q: [H, T, hd], k, v: [KV, T, hd]; grouped heads, causal, optional sliding window."""
    H, T, hd = q.shape
    group = H // k.shape[0]
    k = np.repeat(k, group, axis=0)
    v = np.repeat(v, group, axis=0)
    i = np.arange(T)[:, None]
    j = np.arange(T)[None, :]
    allowed = j <= i
    if window:
        allowed &= j > i - window
    s = q @ k.transpose(0, 2, 1) / math.sqrt(hd)
    s = np.where(allowed, s, -np.inf)
    s = np.exp(s - s.max(axis=-1, keepdims=True))
    s /= s.sum(axis=-1, keepdims=True)
    return (s @ v).transpose(1, 0, 2).reshape(T, H * hd)


def llama_forward(cfg, w, seq, family):
    d, L, H = cfg["hidden_size"], cfg["num_hidden_layers"], cfg["num_attention_heads"]
    KV = cfg.get("num_key_value_heads") or H
    hd = cfg.get("head_dim") or d // H
    eps = cfg["rms_norm_eps"]
    inv = frequencies(hd, cfg.get("rope_theta", 10000.0), cfg.get("rope_scaling"))
    window = 0
    first_window_layer = 0
    if family == "mistral":
        window = cfg.get("sliding_window") or 0
    elif family == "qwen2" and cfg.get("use_sliding_window"):
        window = cfg["sliding_window"]
        first_window_layer = cfg["max_window_layers"]
    T = len(seq)
    x = w["model.embed_tokens.weight"][seq]
    states = [x]
    for l in range(L):
        b = f"model.layers.{l}."
        h = rms_norm(x, w[b + "input_layernorm.weight"], eps)
        def proj(name):
            y = h @ w[b + f"self_attn.{name}_proj.weight"].T
            bias = w.get(b + f"self_attn.{name}_proj.bias")
            return y if bias is None else y + bias
        q = proj("q").reshape(T, H, hd).transpose(1, 0, 2)
        k = proj("k").reshape(T, KV, hd).transpose(1, 0, 2)
        v = proj("v").reshape(T, KV, hd).transpose(1, 0, 2)
        q, k = rotate(q, inv), rotate(k, inv)
        a = attention(q, k, v, window if l >= first_window_layer else 0)
        x = x + a @ w[b + "self_attn.o_proj.weight"].T
        h = rms_norm(x, w[b + "post_attention_layernorm.weight"], eps)
        g = h @ w[b + "mlp.gate_proj.weight"].T
        u = h @ w[b + "mlp.up_proj.weight"].T
        x = x + (g / (1.0 + np.exp(-g)) * u) @ w[b + "mlp.down_proj.weight"].T
        if l + 1 < L:
            states.append(x)
    y = rms_norm(x, w["model.norm.weight"], eps)
    states.append(y)
    head = w["model.embed_tokens.weight"] if cfg.get("tie_word_embeddings", False) else w["lm_head.weight"]
    return states, y @ head.T


def neox_forward(cfg, w, seq):
    d, L, H = cfg["hidden_size"], cfg["num_hidden_layers"], cfg["num_attention_heads"]
    hd = d // H
    eps = cfg["layer_norm_eps"]
    rd = int(round(hd * cfg["rotary_pct"]))
    inv = frequencies(rd, cfg.get("rotary_emb_base", 10000.0), None)
    act = cfg["hidden_act"]
    parallel = cfg.get("use_parallel_residual", True)
    T = len(seq)
    x = w["gpt_neox.embed_in.weight"][seq]
    states = [x]
    for l in range(L):
        b = f"gpt_neox.layers.{l}."

        def attn(h):
            qkv = (h @ w[b + "attention.query_key_value.weight"].T + w[b + "attention.query_key_value.bias"]).reshape(T, H, 3 * hd)
            q = qkv[..., :hd].transpose(1, 0, 2)
            k = qkv[..., hd:2 * hd].transpose(1, 0, 2)
            v = qkv[..., 2 * hd:].transpose(1, 0, 2)
            a = attention(rotate(q, inv), rotate(k, inv), v, 0)
            return a @ w[b + "attention.dense.weight"].T + w[b + "attention.dense.bias"]

        def mlp(h):
            m = activation(h @ w[b + "mlp.dense_h_to_4h.weight"].T + w[b + "mlp.dense_h_to_4h.bias"], act)
            return m @ w[b + "mlp.dense_4h_to_h.weight"].T + w[b + "mlp.dense_4h_to_h.bias"]

        ln1 = layer_norm(x, w[b + "input_layernorm.weight"], w[b + "input_layernorm.bias"], eps)
        if parallel:
            ln2 = layer_norm(x, w[b + "post_attention_layernorm.weight"], w[b + "post_attention_layernorm.bias"], eps)
            x = x + attn(ln1) + mlp(ln2)
        else:
            x = x + attn(ln1)
            x = x + mlp(layer_norm(x, w[b + "post_attention_layernorm.weight"], w[b + "post_attention_layernorm.bias"], eps))
        if l + 1 < L:
            states.append(x)
    y = layer_norm(x, w["gpt_neox.final_layer_norm.weight"], w["gpt_neox.final_layer_norm.bias"], eps)
    states.append(y)
    head = w["gpt_neox.embed_in.weight"] if cfg.get("tie_word_embeddings", False) else w["embed_out.weight"]
    return states, y @ head.T


def main():
    folder, seq_path, out = sys.argv[1], sys.argv[2], sys.argv[3]
    all_logits = "--all-logits" in sys.argv[4:]
    with open(os.path.join(folder, "config.json")) as f:
        cfg = json.load(f)
    with open(seq_path) as f:
        sequences = json.load(f)
    w = read_checkpoint(folder)
    family = cfg["model_type"]
    hidden, last, every = None, [], []
    if family == "gpt_neox":
        head = w["gpt_neox.embed_in.weight"] if cfg.get("tie_word_embeddings", False) else w["embed_out.weight"]
    else:
        head = w["model.embed_tokens.weight"] if cfg.get("tie_word_embeddings", False) else w["lm_head.weight"]
    for seq in sequences:
        states, logits = neox_forward(cfg, w, seq) if family == "gpt_neox" else llama_forward(cfg, w, seq, family)
        hidden = [[s] for s in states] if hidden is None else [h + [s] for h, s in zip(hidden, states)]
        last.append(logits[-1])
        every.append(logits)
    os.makedirs(out, exist_ok=True)
    for k, hs in enumerate(hidden):
        np.save(os.path.join(out, f"hidden_{k}.npy"), np.concatenate(hs))
    last = np.stack(last)
    np.save(os.path.join(out, "logits_last.npy"), last)
    p = np.exp(last - last.max(axis=-1, keepdims=True))
    p /= p.sum(axis=-1, keepdims=True)
    np.save(os.path.join(out, "p_last.npy"), p)
    np.save(os.path.join(out, "cmean_last.npy"), p @ head)
    if all_logits:
        np.save(os.path.join(out, "logits_all.npy"), np.concatenate(every))


if __name__ == "__main__":
    main()
