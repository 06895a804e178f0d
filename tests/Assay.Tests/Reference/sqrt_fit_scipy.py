#!/usr/bin/python3
"""scipy's bounded nonlinear least squares (Debian python3-scipy), the outside reference for the square-root fit.

usage: sqrt_fit_scipy.py '[x...]' '[y...]'
fits y = a + b*sqrt(x - s) with s < min(x) by scipy.optimize.curve_fit (trust-region reflective, bounds on s),
from several starting gaps, and prints JSON: a, b, s, sse (residual sum of squares), r2.
"""
import json
import sys

import numpy as np
from scipy.optimize import curve_fit


def curve(x, a, b, s):
    return a + b * np.sqrt(np.maximum(x - s, 0.0))


def main():
    x = np.array(json.loads(sys.argv[1]), dtype=np.float64)
    y = np.array(json.loads(sys.argv[2]), dtype=np.float64)
    low, spread = x.min(), x.max() - x.min()
    best = None
    for gap in spread * np.array([1e-3, 1e-2, 1e-1, 0.3, 1.0, 3.0, 10.0]):
        try:
            p, _ = curve_fit(curve, x, y, p0=[y.mean(), 0.0, low - gap],
                             bounds=([-np.inf, -np.inf, -np.inf], [np.inf, np.inf, low - 1e-12 * spread]),
                             method="trf", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=100000)
        except RuntimeError:
            continue
        sse = float(((y - curve(x, *p)) ** 2).sum())
        if best is None or sse < best[1]:
            best = (p, sse)
    p, sse = best
    r2 = 1.0 - sse / float(((y - y.mean()) ** 2).sum())
    print(json.dumps({"a": float(p[0]), "b": float(p[1]), "s": float(p[2]), "sse": sse, "r2": r2}))


main()
