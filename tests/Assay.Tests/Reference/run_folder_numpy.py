#!/usr/bin/python3
"""Outside checks of a run folder with numpy, the reference implementation of the .npy format.

usage: run_folder_numpy.py RUN_DIR [MODEL_DIR] [--half-of FLOAT32_RUN_DIR]

Prints one JSON object:
- files: for every .npy in RUN_DIR, the shape and dtype numpy reads (np.load, allow_pickle off);
- with MODEL_DIR and both nextword.npy and cmean.npy present: the conditional-mean check. The output-embedding
  matrix E (lm_head.weight, or the tied wte.weight) is read from the checkpoint by this script's own safetensors
  parser (gpt2_numpy.read_checkpoint); phi = p @ E in float64 from the written p; reports the largest absolute
  difference to the written cmean and the largest |phi|;
- with --half-of: for each float16 file, how many values differ from numpy's float32 -> float16 rounding
  (astype, round to nearest even) of the same file in the float32 run.
"""
import glob
import json
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from gpt2_numpy import read_checkpoint  # noqa: E402


def main():
    args = sys.argv[1:]
    half_of = None
    if "--half-of" in args:
        i = args.index("--half-of")
        half_of = args[i + 1]
        del args[i:i + 2]
    run = args[0]
    model = args[1] if len(args) > 1 else None
    out = {"files": {}}
    for path in sorted(glob.glob(os.path.join(run, "*.npy"))):
        a = np.load(path, allow_pickle=False)
        out["files"][os.path.basename(path)] = {"shape": list(a.shape), "dtype": str(a.dtype)}

    if model is not None and os.path.exists(os.path.join(run, "cmean.npy")):
        tensors = read_checkpoint(model)
        e = tensors.get("lm_head.weight")
        if e is None:
            e = tensors.get("wte.weight", tensors.get("transformer.wte.weight"))
        p = np.load(os.path.join(run, "nextword.npy")).astype(np.float64)
        phi = p @ e
        written = np.load(os.path.join(run, "cmean.npy")).astype(np.float64)
        out["cmean_max_abs"] = float(np.max(np.abs(phi - written))) if phi.size else 0.0
        out["cmean_scale"] = float(np.max(np.abs(phi))) if phi.size else 0.0
        out["p_row_sum_max_dev"] = float(np.max(np.abs(p.sum(axis=1) - 1))) if p.size else 0.0

    if half_of is not None:
        out["half_mismatches"] = {}
        for path in sorted(glob.glob(os.path.join(run, "*.npy"))):
            a = np.load(path)
            if a.dtype != np.float16:
                continue
            full = np.load(os.path.join(half_of, os.path.basename(path)))
            expected = full.astype(np.float16)
            out["half_mismatches"][os.path.basename(path)] = int(np.sum(expected.view(np.uint16) != a.view(np.uint16)))
    print(json.dumps(out))


if __name__ == "__main__":
    main()
