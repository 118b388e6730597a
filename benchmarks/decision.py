"""Cutoff tuning beside scikit-learn's TunedThresholdClassifierCV, in one process.

Both tune the cutoff of the same frozen (already fitted) model on the same held-out rows, for
an imbalanced problem with costs of 2 (needless inspection) versus 35 (missed damage). Printed:
fit time of each and their ratio, the realised cost of each tuned policy on fresh rows, and the
time of probwrap's exact cutoff search against one ``np.argsort`` of the held-out scores.

scikit-learn scores each of its 100 candidate cutoffs with the cost scorer of its own
documentation (confusion matrix times the cost matrix); its fit time depends on that scorer.

Targets: probwrap at least 20x faster at 4e5 rows; realised cost no worse; the search within 3x
of one argsort.

Usage::

    python benchmarks/decision.py              # 1e5 and 4e5 held-out rows
    python benchmarks/decision.py 1000000      # any sizes
"""

from __future__ import annotations

import sys
import time
import warnings

import numpy as np
from sklearn.datasets import make_classification
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix, make_scorer
from sklearn.model_selection import TunedThresholdClassifierCV

from probwrap import CostPolicyWrapper
from probwrap.decision import realised_cost, search_cutoff

COSTS = np.array([[0.0, 2.0], [35.0, 0.0]])  # rows: intact, damaged; columns: ship, inspect


def cost_from_confusion(y_true, y_pred):
    """scikit-learn's documented recipe for a cost scorer: confusion matrix times costs."""
    cm = confusion_matrix(y_true, y_pred, labels=[0, 1])
    return float((cm * COSTS).sum() / cm.sum())


def best_of(fn, repeat=3):
    times = []
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def run(n_heldout: int, seed: int = 0) -> dict:
    n_train, n_fresh = 20_000, n_heldout
    X, y = make_classification(
        n_train + n_heldout + n_fresh, n_features=20, n_informative=6, weights=[0.95],
        flip_y=0.01, class_sep=0.8, random_state=seed,
    )
    Xt, yt = X[:n_train], y[:n_train]
    Xh, yh = X[n_train : n_train + n_heldout], y[n_train : n_train + n_heldout]
    Xf, yf = X[n_train + n_heldout :], y[n_train + n_heldout :]
    model = LogisticRegression(max_iter=1000).fit(Xt, yt)
    frozen = FrozenEstimator(model)

    scorer = make_scorer(cost_from_confusion, greater_is_better=False)

    def fit_sklearn():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # cv="prefit" with a frozen model
            return TunedThresholdClassifierCV(
                frozen, scoring=scorer, cv="prefit", refit=False
            ).fit(Xh, yh)

    def fit_probwrap():
        return CostPolicyWrapper(frozen, costs=COSTS, strategy="tuned").fit(Xh, yh)

    t_sk, sk = best_of(fit_sklearn, repeat=1)
    t_pw, pw = best_of(fit_probwrap)

    p_fresh = model.predict_proba(Xf)[:, 1]
    cost_sk = realised_cost(yf, (p_fresh >= sk.best_threshold_).astype(int), costs=COSTS)
    cost_pw = realised_cost(yf, (p_fresh > pw.cutoff_).astype(int), costs=COSTS)

    p_held = model.predict_proba(Xh)[:, 1]
    t_sort, _ = best_of(lambda: np.argsort(p_held))
    t_search, _ = best_of(lambda: search_cutoff(p_held, yh, COSTS, score_bounds=(0, 1)))
    return {
        "n": n_heldout,
        "t_sk": t_sk,
        "t_pw": t_pw,
        "cost_sk": cost_sk,
        "cost_pw": cost_pw,
        "cut_sk": float(sk.best_threshold_),
        "cut_pw": float(pw.cutoff_),
        "t_sort": t_sort,
        "t_search": t_search,
        "n_distinct": int(np.unique(p_held).shape[0]),
    }


def main(sizes: list[int]) -> None:
    print("cutoff tuning on a frozen model: probwrap CostPolicyWrapper(strategy='tuned') vs "
          "scikit-learn TunedThresholdClassifierCV")
    print(f"{'rows':>9} {'sk fit s':>9} {'pw fit s':>9} {'speed-up':>9} "
          f"{'sk cost':>8} {'pw cost':>8} {'cost ratio':>10} {'sk cut':>7} {'pw cut':>7} "
          f"{'search/argsort':>14}")
    for n in sizes:
        r = run(n)
        print(
            f"{r['n']:>9d} {r['t_sk']:>9.3f} {r['t_pw']:>9.3f} {r['t_sk'] / r['t_pw']:>8.1f}x "
            f"{r['cost_sk']:>8.4f} {r['cost_pw']:>8.4f} {r['cost_pw'] / r['cost_sk']:>10.4f} "
            f"{r['cut_sk']:>7.4f} {r['cut_pw']:>7.4f} {r['t_search'] / r['t_sort']:>13.2f}x"
        )
    print("speed-up = sklearn fit time / probwrap fit time (target >= 20 at 4e5 rows); cost "
          "ratio = probwrap / sklearn realised cost per row on fresh rows (target <= 1 up to "
          "noise); search/argsort = exact cutoff search time / one np.argsort (target <= 3).")


if __name__ == "__main__":
    args = [int(float(a)) for a in sys.argv[1:]] or [100_000, 400_000]
    main(args)
