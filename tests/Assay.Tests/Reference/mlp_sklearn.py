#!/usr/bin/python3
"""scikit-learn's MLPClassifier (Debian python3-sklearn), the outside reference for the MLP probe.

usage: mlp_sklearn.py X.npy Y.npy THETA.npy HIDDEN ALPHA
THETA: the starting parameters as the engine lays them out (W1 hidden x features, b1, W2 classes x hidden, b2).
One tanh hidden layer, L-BFGS, started from THETA (warm start) and run to a tight tolerance.
prints JSON: the probabilities (rows x classes) on X after the fit, the fitted parameters (THETA's layout),
the fitted objective (mean log loss + alpha/2n * squared weights) and the iterations taken.
"""
import json
import sys
import warnings

import numpy as np
import scipy.optimize
from sklearn.exceptions import ConvergenceWarning
from sklearn.neural_network import MLPClassifier

# MLPClassifier passes only gtol to scipy's L-BFGS-B, whose default ftol stops it while the gradient is still ~1e-5;
# ftol 0 lets it run to the gradient tolerance, so the two fits are compared at the minimum, not at two stopping points.
_minimize = scipy.optimize.minimize


def _to_gradient_tolerance(*args, **kwargs):
    kwargs["options"] = dict(kwargs.get("options", {}), ftol=0.0)
    return _minimize(*args, **kwargs)


scipy.optimize.minimize = _to_gradient_tolerance


def main():
    x = np.load(sys.argv[1]).astype(np.float64)
    y = np.load(sys.argv[2]).astype(np.int64).ravel()
    theta = np.load(sys.argv[3]).astype(np.float64).ravel()
    hidden, alpha = int(sys.argv[4]), float(sys.argv[5])
    n, d = x.shape
    k = int(y.max()) + 1
    at = 0
    w1 = theta[at:at + hidden * d].reshape(hidden, d); at += hidden * d
    b1 = theta[at:at + hidden]; at += hidden
    w2 = theta[at:at + k * hidden].reshape(k, hidden); at += k * hidden
    b2 = theta[at:at + k]
    m = MLPClassifier(hidden_layer_sizes=(hidden,), activation="tanh", solver="lbfgs", alpha=alpha,
                      tol=1e-12, max_iter=1, max_fun=100000, warm_start=True, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        m.fit(x, y)  # sets up the classes and shapes; the parameters are replaced next
        m.coefs_ = [w1.T.copy(), w2.T.copy()]
        m.intercepts_ = [b1.copy(), b2.copy()]
        m.set_params(max_iter=100000)
        m.fit(x, y)
    p = m.predict_proba(x)
    logp = np.log(np.clip(p[np.arange(n), y], 1e-300, None))
    objective = -logp.mean() + alpha / (2 * n) * sum((c ** 2).sum() for c in m.coefs_)
    w1f, w2f = m.coefs_[0].T, m.coefs_[1].T
    fitted = np.concatenate([w1f.ravel(), m.intercepts_[0], w2f.ravel(), m.intercepts_[1]])
    print(json.dumps({"probabilities": p.tolist(), "theta": fitted.tolist(),
                      "objective": float(objective), "iterations": int(m.n_iter_)}))


if __name__ == "__main__":
    main()
