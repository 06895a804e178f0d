#!/usr/bin/python3
"""A numpy paired bootstrap (Debian python3-numpy), the outside reference for PairedComparison.

usage: paired_bootstrap_numpy.py PA.npy PB.npy TRUTH.npy INDICES.npy
PA, PB: n x classes probabilities; TRUTH: n x 1 class indices; INDICES: samples x n resample rows (the same draws).
prints JSON: accuracy and log-loss difference (A - B), their 2.5/97.5 percentile interval, and the share of resamples
where each side is better.
"""
import json
import sys

import numpy as np


def main():
    pa, pb = np.load(sys.argv[1]), np.load(sys.argv[2])
    y = np.load(sys.argv[3]).astype(np.int64).ravel()
    idx = np.load(sys.argv[4]).astype(np.int64)
    rows = np.arange(len(y))
    hit_a = (np.argmax(pa, axis=1) == y).astype(np.float64)
    hit_b = (np.argmax(pb, axis=1) == y).astype(np.float64)
    eps = 1e-15
    loss_a = -np.log(np.clip(pa[rows, y], eps, 1 - eps))
    loss_b = -np.log(np.clip(pb[rows, y], eps, 1 - eps))
    acc = (hit_a[idx] - hit_b[idx]).mean(axis=1)
    loss = (loss_a[idx] - loss_b[idx]).mean(axis=1)
    b = idx.shape[0]
    lo, hi = int(np.floor(0.025 * (b - 1))), int(np.ceil(0.975 * (b - 1)))
    sa, sl = np.sort(acc), np.sort(loss)
    print(json.dumps({
        "accuracy_difference": float(hit_a.mean() - hit_b.mean()),
        "accuracy_95": [float(sa[lo]), float(sa[hi])],
        "accuracy_a_better": float((acc > 0).mean()),
        "accuracy_b_better": float((acc < 0).mean()),
        "log_loss_difference": float(loss_a.mean() - loss_b.mean()),
        "log_loss_95": [float(sl[lo]), float(sl[hi])],
        "log_loss_a_better": float((loss < 0).mean()),
        "log_loss_b_better": float((loss > 0).mean()),
    }))


if __name__ == "__main__":
    main()
