#!/usr/bin/python3
"""The columns a data view over a run folder must hold, read with numpy and Python's csv module (outside references).

usage: run_columns_numpy.py RUN_DIR

Prints one JSON object: for every .npy file of RUN_DIR, keyed by its stem, the shape numpy reads and the SHA-256 of
its values as little-endian float32 (float32 and float16 files; float16 widens exactly) or int32 (int32 files), row
by row; and under "rows.csv" the SHA-256 of the ids and of the labels, each joined with newlines.
"""
import csv
import glob
import hashlib
import json
import os
import sys

import numpy as np


def main():
    run = sys.argv[1]
    out = {}
    for path in sorted(glob.glob(os.path.join(run, "*.npy"))):
        a = np.load(path, allow_pickle=False)
        target = "<i4" if a.dtype.kind == "i" else "<f4"
        out[os.path.basename(path)[:-4]] = {
            "shape": list(a.shape),
            "sha256": hashlib.sha256(np.ascontiguousarray(a.astype(target)).tobytes()).hexdigest(),
        }
    with open(os.path.join(run, "rows.csv"), newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    out["rows.csv"] = {
        "ids": hashlib.sha256("\n".join(r["id"] for r in rows).encode("utf-8")).hexdigest(),
        "labels": hashlib.sha256("\n".join(r["label"] for r in rows).encode("utf-8")).hexdigest(),
    }
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
