"""Do the named calibration methods do no harm on small multiclass calibration sets?

For scikit-learn's bundled wine (3 classes), iris (3) and digits (10) data sets, three base
models (a random forest of 50 trees, Gaussian naive Bayes, standardised logistic regression) are
fitted on a third of the rows; ``CalibrationWrapper(FrozenEstimator(model), method=m)`` is fitted
on ``n`` = 20, 40 or 60 further rows (drawn repeatedly) and scored by log loss on the rest.
Printed per cell: the ratio of each method's test log loss to the base model's own (below 1: the
map helps; above 1: it does harm), then the geometric mean and the worst draw over all cells;
last, the same per cell as a ratio of the mean losses over its draws ("pooled"), which a draw
where the model happens to be right on every test row cannot dominate.

The 20-row digits draws leave some classes without calibration rows; those classes keep the
model's own probability (see docs/calibration.md, "Multiclass").

Run: ``python benchmarks/calibration_small_draws.py`` (``--quick``: one draw per cell instead
of three; about 30 s on one core).
"""

from __future__ import annotations

import sys
import warnings

import numpy as np
from sklearn.datasets import load_digits, load_iris, load_wine
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper

METHODS = [
    "auto", "temperature", "vector_scaling", "platt", "beta", "isotonic", "binning", "venn_abers",
]
DATA = {"wine": load_wine, "iris": load_iris, "digits": load_digits}
MODELS = {
    "forest": lambda: RandomForestClassifier(n_estimators=50, random_state=0),
    "naive_bayes": GaussianNB,
    "logistic": lambda: make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
}
SIZES = (20, 40, 60)


def _log_loss(p: np.ndarray, y: np.ndarray) -> float:
    # floored at 1e-15 only so that an exact 0 stays finite (scikit-learn's log_loss convention)
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y)), y], 1e-15, 1.0))))


def main(draws: int) -> None:
    every: dict[str, list[float]] = {m: [] for m in METHODS}
    # per cell, the ratio of the mean test log losses over its draws (not the mean of the
    # per-draw ratios): a draw whose test rows the model gets all right has a tiny loss of its
    # own, and there any map's small flattening is a large ratio (iris with naive Bayes)
    pooled: dict[str, list[float]] = {m: [] for m in METHODS}
    print(f"{'data':7s}{'model':12s}{'rows':>5s}  " + " ".join(f"{m[:8]:>8s}" for m in METHODS))
    for data_name, load in DATA.items():
        X, y = load(return_X_y=True)
        for model_name, make in MODELS.items():
            for n in SIZES:
                ratios: dict[str, list[float]] = {m: [] for m in METHODS}
                losses: dict[str, list[float]] = {m: [] for m in [*METHODS, "own"]}
                for d in range(draws):
                    idx = np.random.default_rng(100 + d).permutation(len(y))
                    train, rest = idx[: len(y) // 3], idx[len(y) // 3:]
                    cal, test = rest[:n], rest[n:]
                    base = make().fit(X[train], y[train])
                    own = _log_loss(base.predict_proba(X[test]), y[test])
                    losses["own"].append(own)
                    for m in METHODS:
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            w = CalibrationWrapper(FrozenEstimator(base), method=m, random_state=0)
                            p = w.fit(X[cal], y[cal]).predict_proba(X[test])
                        losses[m].append(_log_loss(p, y[test]))
                        ratios[m].append(losses[m][-1] / own)
                for m in METHODS:
                    every[m].extend(ratios[m])
                    pooled[m].append(np.mean(losses[m]) / np.mean(losses["own"]))
                cells = " ".join(f"{np.exp(np.mean(np.log(ratios[m]))):8.2f}" for m in METHODS)
                print(f"{data_name:7s}{model_name:12s}{n:5d}  {cells}", flush=True)
    print(f"{'geometric mean':24s}  " + " ".join(
        f"{np.exp(np.mean(np.log(every[m]))):8.2f}" for m in METHODS))
    print(f"{'worst draw':24s}  " + " ".join(f"{max(every[m]):8.2f}" for m in METHODS))
    print(f"{'gmean, pooled per cell':24s}  " + " ".join(
        f"{np.exp(np.mean(np.log(pooled[m]))):8.2f}" for m in METHODS))
    print(f"{'worst cell, pooled':24s}  " + " ".join(f"{max(pooled[m]):8.2f}" for m in METHODS))
    print("Ratios are test log loss over the base model's own; above 1 the map does harm.")


if __name__ == "__main__":
    main(1 if "--quick" in sys.argv else 3)
