#!/bin/sh
# Feature drift and probe-accuracy change of reduced-precision weights (--weights bfloat16, int8) against float32,
# on the bundled WordNet supersense task with the bundled demo model: every 8th training and every 4th test
# definition, prompt "{text} It is a kind of", features hidden and cmean, one probe per feature at C = 0.1 (2 folds: the subsample has classes of 3 and 4 training rows).
# Drift (cosine and max-abs per row, numpy from Debian python3-numpy) is taken over the test rows.
# Usage: tools/weights-drift.sh [OUT-DIR]   (default out/weights-drift; about 5 minutes on 2 cores)
set -eu
out=${1:-out/weights-drift}
task=src/Assay.Cli/tasks/wordnet-supersense
dotnet build src/Assay.Cli -c Release -v quiet -nologo >/dev/null
assay="dotnet src/Assay.Cli/bin/Release/net10.0/assay.dll"
mkdir -p "$out"
awk 'NR % 8 == 1' "$task/train.jsonl" > "$out/train.jsonl"
awk 'NR % 4 == 1' "$task/test.jsonl" > "$out/test.jsonl"
for w in float32 bfloat16 int8; do
  for part in train test; do
    $assay extract "$out/$part.jsonl" --out "$out/$w-$part" --weights "$w" --prompt "{text} It is a kind of" \
      --features hidden,cmean --overwrite --progress-seconds 60 >/dev/null
  done
  for f in hidden.layer4.last cmean; do
    rm -rf "$out/$w-probe-$f"
    $assay probe --train "$out/$w-train" --test "$out/$w-test" --feature "$f" --strengths 0.1 --folds 2 --out "$out/$w-probe-$f" >/dev/null
  done
done
/usr/bin/python3 - "$out" <<'PY'
import json, sys
import numpy as np
out = sys.argv[1]
print("| weights | feature | cosine to float32 (min / median over test rows) | max abs difference | probe accuracy | change |")
print("|---|---|---|---|---:|---:|")
for f in ("hidden.layer4.last", "cmean"):
    npy = f + ".npy"
    ref = np.load(f"{out}/float32-test/{npy}").astype(np.float64)
    acc32 = json.load(open(f"{out}/float32-probe-{f}/report.json"))["test"]["accuracy"]
    for w in ("float32", "bfloat16", "int8"):
        x = np.load(f"{out}/{w}-test/{npy}").astype(np.float64)
        cos = (x * ref).sum(1) / np.sqrt((x * x).sum(1) * (ref * ref).sum(1))
        acc = json.load(open(f"{out}/{w}-probe-{f}/report.json"))["test"]["accuracy"]
        print(f"| {w} | {f} | {cos.min():.6f} / {np.median(cos):.6f} | {np.abs(x - ref).max():.3g} | {100 * acc:.2f} % | {100 * (acc - acc32):+.2f} |")
PY
