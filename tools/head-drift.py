#!/usr/bin/env python3
"""What an int8 output head would do to the next-word distribution and to Φp, simulated in numpy (float64).

The engine keeps the head (and the token embedding) in bfloat16 under --weights int8; this measures why. From a run's
final hidden states h (one row per text) and the model's token embedding E (tied head), it compares the float64
distribution p = softmax(h·Eᵀ) with the one an int8 head would give: h and E quantized symmetrically per row as the
engine's int8 GEMM does (largest magnitude -> 127, round half to even), and with E alone quantized. It prints, over
the rows: KL(p || p_int8), how often the most likely word is the same, Φp's cosine (Φp = p·E against p_int8·E_int8),
and the largest logit change as a share of the row's logit range.

  tools/head-drift.py MODEL_FOLDER RUN_FOLDER      e.g. src/Assay.Cli/models/assay-demo out/run-demo
  (RUN_FOLDER from `assay extract --features hidden`; needs Debian's python3-numpy)
"""
import glob
import json
import os
import struct
import sys

import numpy as np


def tensor(folder, names):
    with open(os.path.join(folder, "model.safetensors"), "rb") as f:
        n = struct.unpack("<Q", f.read(8))[0]
        header = json.loads(f.read(n))
        name = next(x for x in names if x in header)
        t = header[name]
        f.seek(8 + n + t["data_offsets"][0])
        raw = f.read(t["data_offsets"][1] - t["data_offsets"][0])
    if t["dtype"] == "BF16":
        return (np.frombuffer(raw, "<u2").astype(np.uint32) << 16).view(np.float32).astype(np.float64).reshape(t["shape"])
    return np.frombuffer(raw, {"F16": "<f2", "F32": "<f4"}[t["dtype"]]).astype(np.float64).reshape(t["shape"])


def quantized(x):
    s = np.abs(x).max(1, keepdims=True) / 127.0
    s[s == 0] = 1.0
    return np.round(x / s) * s


def softmax(z):
    z = z - z.max(1, keepdims=True)
    e = np.exp(z)
    return e / e.sum(1, keepdims=True)


def main():
    if len(sys.argv) != 3:
        sys.exit(__doc__)
    model, run = sys.argv[1:]
    E = tensor(model, ["wte.weight", "transformer.wte.weight", "model.embed_tokens.weight"])
    last = sorted(glob.glob(os.path.join(run, "hidden.layer*.last.npy")), key=lambda p: int(p.split("layer")[1].split(".")[0]))[-1]
    h = np.load(last).astype(np.float64)
    logits = h @ E.T
    p = softmax(logits)
    print(f"{os.path.basename(last)}: {h.shape[0]} rows, width {h.shape[1]}, vocabulary {E.shape[0]}")
    for name, hq, Eq in (("int8 head (h and E per row)", quantized(h), quantized(E)), ("E alone in int8", h, quantized(E))):
        zq = hq @ Eq.T
        pq = softmax(zq)
        kl = (p * (np.log(p) - np.log(pq))).sum(1)
        same = (p.argmax(1) == pq.argmax(1)).mean()
        phi, phiq = p @ E, pq @ Eq
        cos = (phi * phiq).sum(1) / np.sqrt((phi * phi).sum(1) * (phiq * phiq).sum(1))
        dz = np.abs(logits - zq).max(1) / np.ptp(logits, axis=1)
        print(f"{name}: KL median {np.median(kl):.2e}, max {kl.max():.2e} nats; same top word {100 * same:.2f} %; "
              f"Φp cosine min {cos.min():.6f}, median {np.median(cos):.6f}; largest logit change {100 * np.median(dz):.2f} % of the range (median row)")


main()
