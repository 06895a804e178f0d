#!/usr/bin/python3
"""scikit-learn's metrics (Debian python3-sklearn) on a predictions.csv written by assay probe.

usage: probe_metrics_sklearn.py predictions.csv
prints JSON: accuracy, log_loss, macro_f1, confusion (rows = true, columns = predicted, classes in column order).
"""
import csv
import json
import sys

import numpy as np
from sklearn.metrics import accuracy_score, confusion_matrix, f1_score, log_loss


def main():
    with open(sys.argv[1], newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    header, body = rows[0], rows[1:]
    classes = [h[2:] for h in header[3:]]
    truth = [r[1] for r in body]
    predicted = [r[2] for r in body]
    p = np.array([[float(v) for v in r[3:]] for r in body])
    print(json.dumps({
        "accuracy": accuracy_score(truth, predicted),
        "log_loss": log_loss(truth, p, labels=classes),
        "macro_f1": f1_score(truth, predicted, average="macro"),
        "confusion": confusion_matrix(truth, predicted, labels=classes).tolist(),
    }))


if __name__ == "__main__":
    main()
