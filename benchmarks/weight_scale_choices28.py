"""Scaling every sample_weight by 1e-3 or 1e3 must not change a choice (docs/weights.md).

On scikit-learn's breast cancer, wine and iris (150 labelled rows; a frozen logistic regression
and a cross-fitted Gaussian naive Bayes), weights drawn from 0.2-3 (relative) and whole counts 1-3,
prints the choice of each wrapper at x1, x1e-3 and x1e3 (auto's map, the tuned cutoff or class
offsets, the prior estimate with the labelled or the unlabelled weights scaled) and the warning
classes raised. Session 28: relative weights SAME in every auto / tuned / adapt row; counts
x1 differ from scaled counts (read as relative, with a WeightScaleWarning), and the labelled
weights reach the prior estimate through the calibration (documented, warned).

Run: python benchmarks/weight_scale_choices28.py (about 30 s).
"""
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

SETS = {"breast_cancer": load_breast_cancer, "wine": load_wine, "iris": load_iris}
SCALES = (1.0, 1e-3, 1e3)


def choices(kind, est, X, y, w, Xu=None, wu=None, seed=0):
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        if kind == "auto":
            m = CalibrationWrapper(est, method="auto", cv=3, random_state=seed).fit(X, y, sample_weight=w)
            out = (m.method_,)
        elif kind == "tuned":
            k = np.unique(y).shape[0]
            costs = {"tp": 0, "fp": 1, "fn": 4, "tn": 0} if k == 2 else (1 - np.eye(k)) * np.arange(1, k + 1)[:, None]
            m = CostPolicyWrapper(est, costs=costs, strategy="tuned", cv=3, random_state=seed).fit(X, y, sample_weight=w)
            out = (np.round(np.atleast_1d(getattr(m, "cutoff_", None) if k == 2 else getattr(m, "class_offsets_", np.nan)).astype(float), 10).tolist(),)
        elif kind == "prior_fit":
            m = PriorShiftWrapper(est, cv=3, random_state=seed).fit(X, y, sample_weight=w).adapt(Xu)
            out = (np.round(m.target_prior_, 10).tolist(),)
        else:  # prior_adapt: unlabelled weights scaled
            m = PriorShiftWrapper(est, cv=3, random_state=seed).fit(X, y).adapt(Xu, sample_weight=wu)
            out = (np.round(m.target_prior_, 10).tolist(),)
    ws = sorted({r.category.__name__ for r in rec if r.category.__name__ not in ("ConvergenceWarning",)})
    return out, ws


def main() -> None:
    rng = np.random.default_rng(28)
    for name, loader in SETS.items():
        X, y = loader(return_X_y=True)
        X = StandardScaler().fit_transform(X)
        perm = rng.permutation(len(y))
        X, y = X[perm], y[perm]
        n = min(len(y) // 2, 150)
        Xa, ya = X[:n], y[:n]          # labelled (fit)
        Xb, yb = X[n:2 * n], y[n:2 * n]  # training rows of the frozen model
        Xu = X[n:]                       # unlabelled for adapt
        frozen = FrozenEstimator(LogisticRegression(C=0.3, max_iter=2000).fit(Xb, yb))
        for wkind in ("float", "count"):
            w = rng.uniform(0.2, 3.0, size=n) if wkind == "float" else rng.integers(1, 4, size=n).astype(float)
            wu = rng.uniform(0.2, 3.0, size=Xu.shape[0])
            for mname, est in (("GNB-xfit", GaussianNB()), ("LR-frozen", frozen)):
                for kind in ("auto", "tuned", "prior_fit", "prior_adapt"):
                    if kind == "prior_adapt" and wkind == "count":
                        continue
                    res = [choices(kind, est, Xa, ya, w * s, Xu, wu * s) for s in SCALES]
                    vals = [r[0] for r in res]
                    same = all(v == vals[0] for v in vals)
                    print(f"{name:13s} {wkind:5s} {mname:9s} {kind:11s} {'SAME' if same else 'DIFF'} "
                          + " | ".join(f"x{s:g}:{v} {r[1]}" for s, v, r in zip(SCALES, vals, res, strict=True)), flush=True)


if __name__ == "__main__":
    main()
