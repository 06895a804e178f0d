#!/usr/bin/python3
"""Control-task labels recomputed with Python's hashlib, and a chi-squared test of their distribution (Debian
python3-scipy), the outside references for ControlTask.

usage: control_labels_python.py TYPES.txt TASK_LABELS.txt SEED ENGINE_LABELS.txt
TYPES: one type a line; TASK_LABELS: the training labels, one a line; ENGINE_LABELS: the engine's label per type.
prints JSON: the labels by the documented rule, and the chi-squared p-value of the engine's labels (one per distinct
type) against the task's label shares.
"""
import hashlib
import json
import struct
import sys
from collections import Counter

from scipy.stats import chisquare


def lines(path):
    with open(path, encoding="utf-8") as f:
        return f.read().split("\n")[:-1]


def main():
    types, task = lines(sys.argv[1]), lines(sys.argv[2])
    seed = int(sys.argv[3])
    engine = lines(sys.argv[4])
    classes = sorted(set(task), key=lambda c: c.encode("utf-16-be"))
    counts = Counter(task)
    cumulative, total = [], 0
    for c in classes:
        total += counts[c]
        cumulative.append(total / len(task))
    prefix = struct.pack("<Q", seed)
    labels = []
    for t in types:
        u = (struct.unpack("<Q", hashlib.sha256(prefix + t.encode("utf-8")).digest()[:8])[0] >> 11) * (1.0 / (1 << 53))
        j = 0
        while j < len(classes) - 1 and cumulative[j] <= u:
            j += 1
        labels.append(classes[j])
    first = {}
    for t, l in zip(types, engine):
        first.setdefault(t, l)
    observed = Counter(first.values())
    n = len(first)
    _, p = chisquare([observed[c] for c in classes], [counts[c] / len(task) * n for c in classes])
    print(json.dumps({"labels": labels, "p_value": float(p)}))


if __name__ == "__main__":
    main()
