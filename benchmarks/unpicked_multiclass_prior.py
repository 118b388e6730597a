"""The prior cells of the multiclass sweep alone, on cached model probabilities.

Reuses ``benchmarks/unpicked_multiclass_sweep.py`` (its task sample, splits, models and shifted
test rows; ``pip install -e ".[sweep]"``): per task x seed x n in (150, 400) x model, the
model's probabilities on the n held-out rows and on the test rows are computed once and kept in
``--cache`` (a pickle; about a CPU minute). Then ``PriorShiftWrapper`` (defaults) is fitted on
the held-out probabilities through a frozen pass-through model and adapted to the test rows as
they are ("none") and with one seeded class's share doubled ("up") or halved ("down"), as in
the sweep. Per size and kind: coverage of the 95 % interval of the true test shares, cells where
adapt is more than 1.02x worse than before it (and how many of those drew no warning), misses
without a warning, the share of warned cells among those where adapt did no harm, the mean
width of the interval (over the classes) and the cells where some class's interval is all of
[0, 1] (``PriorNotIdentifiedWarning`` from adapt).

Run: nice python benchmarks/unpicked_multiclass_prior.py --tasks mc.tasks.json \
         --cache mc_prior.pkl --out mc_prior.csv
     (``mc.tasks.json``: the task sample the sweep keeps beside its ``--out``; about two CPU
     minutes after the cache)
"""

from __future__ import annotations

import argparse
import copy
import json
import pickle
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin, clone
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import train_test_split

from probwrap import PriorShiftWrapper

HERE = Path(__file__).parent
sys.path.insert(0, str(HERE))
import unpicked_data as T  # noqa: E402
import unpicked_multiclass_sweep as S  # noqa: E402

SIZES = (150, 400)


class GivenProbabilities(ClassifierMixin, BaseEstimator):
    """A model whose input is already its probabilities (for re-running the wrapper cheaply)."""

    def __init__(self, n_classes=3):
        self.n_classes = n_classes

    def fit(self, X=None, y=None):
        self.classes_ = np.arange(self.n_classes)
        return self

    def predict_proba(self, X):
        return np.asarray(X, dtype=float)


def cache_cells(tasks_path: Path, cache: Path) -> list:
    if cache.exists():
        return pickle.loads(cache.read_bytes())
    sample = json.loads(tasks_path.read_text())
    out = []
    for ti, spec in enumerate(sample):
        try:
            X, y = T.multiclass_task_data(spec)
        except Exception:  # noqa: BLE001
            continue
        k = int(y.max()) + 1
        for seed in S.SEEDS:
            pool, te = train_test_split(np.arange(len(y)), test_size=0.4, stratify=y,
                                        random_state=seed)
            for n in SIZES:
                tr, ho, _ = S.draw(pool, y, n, seed)
                if tr is None:
                    continue
                for name, m0 in S.models(seed).items():
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        try:
                            m = clone(m0).fit(X[tr], y[tr])
                            pho, pte = m.predict_proba(X[ho]), m.predict_proba(X[te])
                        except Exception:  # noqa: BLE001
                            continue
                    if pho.shape[1] == k:
                        out.append(dict(task=ti, seed=seed, n=n, model=name, k=k, pho=pho,
                                        yho=y[ho], pte=pte, yte=y[te]))
    cache.write_bytes(pickle.dumps(out))
    return out


def run(cells: list) -> list:
    rows = []
    for c in cells:
        k, seed, ti = c["k"], c["seed"], c["task"]
        model = FrozenEstimator(GivenProbabilities(k).fit())
        rng = np.random.default_rng([seed, ti, 7])  # as the sweep: the shifted class and rows
        cls = int(rng.integers(k))
        yte, pte = c["yte"], c["pte"]
        variants = {"none": (np.arange(len(yte)), np.bincount(yte, minlength=k) / len(yte))}
        variants["up"] = S.shifted(yte, cls, 2.0, rng)
        variants["down"] = S.shifted(yte, cls, 0.5, rng)
        with warnings.catch_warnings(record=True) as fit_w:
            warnings.simplefilter("always")
            ps = PriorShiftWrapper(model, random_state=0).fit(c["pho"], c["yho"])
            before = ps.predict_proba(pte)
        fit_cats = {w.category.__name__ for w in fit_w}
        for kind, (idx, q) in variants.items():
            with warnings.catch_warnings(record=True) as ad_w:
                warnings.simplefilter("always")
                ad = copy.deepcopy(ps).adapt(pte[idx])
                after = ad.predict_proba(pte[idx])
            cats = fit_cats | {w.category.__name__ for w in ad_w}
            iv = np.asarray(ad.target_prior_interval_, dtype=float)
            rows.append(dict(
                n=c["n"], kind=kind, ll_before=S.ll(yte[idx], before[idx], k),
                ll_after=S.ll(yte[idx], after, k),
                cover=bool(np.all((iv[:, 0] <= q + 1e-9) & (q - 1e-9 <= iv[:, 1]))),
                width=float(np.mean(iv[:, 1] - iv[:, 0])),
                whole=bool(np.any((iv[:, 0] <= 1e-6) & (iv[:, 1] >= 1.0 - 1e-6))),
                warned=bool(cats - {"ConvergenceWarning"}), cats=";".join(sorted(cats))))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--tasks", required=True, help="the sweep's task sample (JSON)")
    ap.add_argument("--cache", required=True, help="pickle of the models' probabilities")
    ap.add_argument("--out", help="CSV of cells")
    a = ap.parse_args()
    rows = run(cache_cells(Path(a.tasks), Path(a.cache)))
    if a.out:
        import pandas as pd

        pd.DataFrame(rows).to_csv(a.out, index=False)
    for n in SIZES:
        for kind in ("none", "up", "down"):
            g = [r for r in rows if r["n"] == n and r["kind"] == kind]
            harm = [r for r in g if r["ll_after"] > 1.02 * r["ll_before"]]
            unharmed = [r for r in g if not r["ll_after"] > 1.02 * r["ll_before"]]
            print(f"n={n:4d} {kind:5s} cells {len(g):4d}  coverage "
                  f"{np.mean([r['cover'] for r in g]):.3f}  width {np.mean([r['width'] for r in g]):.3f}  "
                  f"[0,1] {sum(r['whole'] for r in g):3d}  harm>1.02 {len(harm):3d} "
                  f"(unwarned {sum(not r['warned'] for r in harm):3d})  "
                  f"unwarned misses {sum(not r['cover'] and not r['warned'] for r in g):3d}  "
                  f"warned among unharmed {np.mean([r['warned'] for r in unharmed]):.3f}")


if __name__ == "__main__":
    main()
