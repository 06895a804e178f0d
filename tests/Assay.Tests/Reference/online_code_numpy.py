#!/usr/bin/python3
"""The online code's codelength recomputed with numpy (Debian python3-numpy) from the probes' predictions, the outside
reference for OnlineCode.

usage: online_code_numpy.py P.npy Y.npy ROWS CLASSES
P: the probabilities of every encoded row (blocks 2, 3, ... one after another) x classes; Y: their true classes.
Block ends are floor(f * ROWS / 100) for the published fractions, at least 1, repeats dropped.
prints JSON: the bits of each block (the first by the uniform code), the total, the uniform codelength and the ratio.
"""
import json
import sys

import numpy as np

FRACTIONS = [0.1, 0.2, 0.4, 0.8, 1.6, 3.2, 6.25, 12.5, 25, 50, 100]


def main():
    p = np.load(sys.argv[1])
    y = np.load(sys.argv[2]).astype(np.int64).ravel()
    n, k = int(sys.argv[3]), int(sys.argv[4])
    ends = []
    for f in FRACTIONS:
        e = min(max(int(np.floor(f * n / 100)), 1), n)
        if e not in ends:
            ends.append(e)
    row_bits = -np.log2(np.maximum(p[np.arange(len(y)), y], 1e-15))
    blocks = [ends[0] * np.log2(k)]
    at = 0
    for start, end in zip(ends[:-1], ends[1:]):
        blocks.append(float(row_bits[at:at + end - start].sum()))
        at += end - start
    assert at == len(y), (at, len(y))
    total = float(sum(blocks))
    uniform = n * np.log2(k)
    print(json.dumps({"ends": ends, "blocks": [float(b) for b in blocks], "codelength": total, "uniform": float(uniform),
                      "compression": float(uniform / total)}))


if __name__ == "__main__":
    main()
