#!/usr/bin/python3
"""Independent GPT-2 forward pass in numpy (float64), the outside reference for the engine's parity tests.

Reads a checkpoint folder on its own: config.json, model.safetensors or the shards of model.safetensors.index.json
(parsed here from the open format: 8-byte little-endian header length, JSON header, raw little-endian data), with
F32, F16 and BF16 tensors. Architecture (common practice, as published for GPT-2): token + position embedding;
per block x += attn(ln_1(x)), x += mlp(ln_2(x)); final ln_f; logits = ln_f(x) @ E^T (or lm_head.weight).

usage: gpt2_numpy.py MODEL_DIR SEQUENCES_JSON OUT_DIR [--all-logits]
writes OUT_DIR/hidden_{k}.npy ([T, d] float64, all sequences end to end, k = 0 .. L) and
OUT_DIR/logits_last.npy ([B, V] float64), and with --all-logits OUT_DIR/logits_all.npy ([T, V]).
"""
import json
import math
import os
import struct
import sys

import numpy as np


def read_safetensors(path):
    with open(path, "rb") as f:
        raw = f.read()
    (n,) = struct.unpack("<Q", raw[:8])
    header = json.loads(raw[8:8 + n].decode("utf-8"))
    data = raw[8 + n:]
    out = {}
    for name, e in header.items():
        if name == "__metadata__":
            continue
        b, end = e["data_offsets"]
        chunk = data[b:end]
        shape = e["shape"]
        dt = e["dtype"]
        if dt == "F32":
            a = np.frombuffer(chunk, dtype="<f4").astype(np.float64)
        elif dt == "F16":
            a = np.frombuffer(chunk, dtype="<f2").astype(np.float64)
        elif dt == "BF16":
            a = (np.frombuffer(chunk, dtype="<u2").astype(np.uint32) << 16).view(np.float32).astype(np.float64)
        else:
            continue  # integer / bool buffers (causal masks) are not parameters
        out[name] = a.reshape(shape)
    return out


def read_checkpoint(folder):
    index = os.path.join(folder, "model.safetensors.index.json")
    if os.path.exists(index):
        with open(index) as f:
            shards = sorted(set(json.load(f)["weight_map"].values()))
        tensors = {}
        for s in shards:
            tensors.update(read_safetensors(os.path.join(folder, s)))
        return tensors
    return read_safetensors(os.path.join(folder, "model.safetensors"))


def layer_norm(x, g, b, eps):
    mean = x.mean(axis=-1, keepdims=True)
    var = ((x - mean) ** 2).mean(axis=-1, keepdims=True)
    return (x - mean) / np.sqrt(var + eps) * g + b


def activation(x, name):
    if name in ("gelu_new", "gelu_pytorch_tanh", "gelu_fast"):
        return 0.5 * x * (1.0 + np.tanh(math.sqrt(2.0 / math.pi) * (x + 0.044715 * x ** 3)))
    if name == "gelu":
        erf = np.vectorize(math.erf)
        return 0.5 * x * (1.0 + erf(x / math.sqrt(2.0)))
    if name == "relu":
        return np.maximum(x, 0.0)
    raise ValueError(name)


def forward(folder, sequences, all_logits):
    with open(os.path.join(folder, "config.json")) as f:
        cfg = json.load(f)
    w = read_checkpoint(folder)
    p = "transformer." if "transformer.wte.weight" in w else ""
    d, L, H = cfg["n_embd"], cfg["n_layer"], cfg["n_head"]
    eps = cfg["layer_norm_epsilon"]
    act = cfg["activation_function"]
    hd = d // H
    wte, wpe = w[p + "wte.weight"], w[p + "wpe.weight"]
    head = wte if cfg.get("tie_word_embeddings", True) else w["lm_head.weight"]

    hidden = [[] for _ in range(L + 1)]
    last, every = [], []
    for seq in sequences:
        T = len(seq)
        x = wte[seq] + wpe[:T]
        hidden[0].append(x)
        mask = np.triu(np.full((T, T), -np.inf), k=1)
        for l in range(L):
            b = f"{p}h.{l}."
            h = layer_norm(x, w[b + "ln_1.weight"], w[b + "ln_1.bias"], eps)
            qkv = h @ w[b + "attn.c_attn.weight"] + w[b + "attn.c_attn.bias"]
            q, k, v = np.split(qkv, 3, axis=-1)
            q = q.reshape(T, H, hd).transpose(1, 0, 2)
            k = k.reshape(T, H, hd).transpose(1, 0, 2)
            v = v.reshape(T, H, hd).transpose(1, 0, 2)
            s = q @ k.transpose(0, 2, 1) / math.sqrt(hd) + mask
            s = np.exp(s - s.max(axis=-1, keepdims=True))
            s /= s.sum(axis=-1, keepdims=True)
            a = (s @ v).transpose(1, 0, 2).reshape(T, d)
            x = x + a @ w[b + "attn.c_proj.weight"] + w[b + "attn.c_proj.bias"]
            h = layer_norm(x, w[b + "ln_2.weight"], w[b + "ln_2.bias"], eps)
            m = activation(h @ w[b + "mlp.c_fc.weight"] + w[b + "mlp.c_fc.bias"], act)
            x = x + m @ w[b + "mlp.c_proj.weight"] + w[b + "mlp.c_proj.bias"]
            if l + 1 < L:
                hidden[l + 1].append(x)
        y = layer_norm(x, w[p + "ln_f.weight"], w[p + "ln_f.bias"], eps)
        hidden[L].append(y)
        last.append(y[-1] @ head.T)
        if all_logits:
            every.append(y @ head.T)
    return [np.concatenate(hs) for hs in hidden], np.stack(last), (np.concatenate(every) if all_logits else None)


def main():
    folder, seq_path, out = sys.argv[1], sys.argv[2], sys.argv[3]
    all_logits = "--all-logits" in sys.argv[4:]
    with open(seq_path) as f:
        sequences = json.load(f)
    os.makedirs(out, exist_ok=True)
    hidden, last, every = forward(folder, sequences, all_logits)
    for k, h in enumerate(hidden):
        np.save(os.path.join(out, f"hidden_{k}.npy"), h)
    np.save(os.path.join(out, "logits_last.npy"), last)
    if every is not None:
        np.save(os.path.join(out, "logits_all.npy"), every)


if __name__ == "__main__":
    main()
