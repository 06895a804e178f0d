#!/usr/bin/python3
"""Cross-entropy of next tokens from logits, in numpy (float64): the outside reference for the engine's scorer.

usage: cross_entropy_numpy.py LOGITS.npy TARGETS.npy
LOGITS: [T, V] float32, row t the logits that predict TARGETS[t]. Prints JSON: nats (total), tokens.
"""
import json
import sys

import numpy as np


def main():
    logits = np.load(sys.argv[1]).astype(np.float64)
    targets = np.load(sys.argv[2]).astype(np.int64).ravel()
    m = logits.max(axis=1, keepdims=True)
    logp = logits - m - np.log(np.exp(logits - m).sum(axis=1, keepdims=True))
    nats = -logp[np.arange(len(targets)), targets].sum()
    print(json.dumps({"nats": float(nats), "tokens": int(len(targets))}))


if __name__ == "__main__":
    main()
