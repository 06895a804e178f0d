#!/usr/bin/python3
"""scikit-learn's multinomial L2 logistic regression (Debian python3-sklearn), the outside reference for the probe.

usage: logistic_sklearn.py X.npy Y.npy C
prints JSON: coef (classes x features), intercept (centred to sum 0), objective C*sum(log loss) + 0.5*||W||^2.
"""
import json
import sys

import numpy as np
from sklearn.linear_model import LogisticRegression


def main():
    x = np.load(sys.argv[1]).astype(np.float64)
    y = np.load(sys.argv[2]).astype(np.int64).ravel()
    c = float(sys.argv[3])
    m = LogisticRegression(C=c, multi_class="multinomial", solver="lbfgs", tol=1e-12, max_iter=100000)
    m.fit(x, y)
    coef, intercept = m.coef_, m.intercept_
    if coef.shape[0] == 1:
        # Two classes: scikit-learn keeps the row of class 1; the multinomial fit's row of class 0 is its negative.
        coef, intercept = np.vstack([-coef, coef]), np.concatenate([-intercept, intercept])
    z = x @ coef.T + intercept
    z -= z.max(axis=1, keepdims=True)
    logp = z - np.log(np.exp(z).sum(axis=1, keepdims=True))
    objective = c * -logp[np.arange(len(y)), y].sum() + 0.5 * (coef ** 2).sum()
    b = intercept - intercept.mean()
    print(json.dumps({"coef": coef.tolist(), "intercept": b.tolist(), "objective": float(objective)}))


if __name__ == "__main__":
    main()
