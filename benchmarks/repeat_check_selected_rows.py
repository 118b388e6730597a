"""How often ``RepeatedRowsWarning`` fires on batches of distinct records and on batches that
truly repeat rows, on bundled sets with coarse features.

Each seed fits gradient boosting on 40 % of the rows, wraps it frozen in ``PriorShiftWrapper``
fitted on the next 30 % and adapts to batches of the last 30 % (the loader of
``benchmarks/feature_selected_batches.py``; no download at run time):

* *feature*: distinct rows above the 50th or 70th, or below the 30th or 15th percentile of each
  of the three columns with the most distinct values (at most 400 rows);
* *prior*: distinct rows at a class share from U(0.15, 0.85) (a batch shrinks where a class's
  pool is short);
* *repeat*: 300 rows drawn with replacement from 150 rows of a prior batch, or 200 from 100
  rows of a feature batch of at least 100 rows: every batch truly repeats rows (design effect
  about 3).

``--old`` judges without :func:`probwrap.shift._repeats.selection_rate` (the rule before it).
``--dask`` adapts to every batch on Dask too (two partitions) and counts the batches whose
``RepeatedRowsWarning`` differs from memory's (raised or not, or other words or numbers) and
whose mixture-check p-value differs (relative 1e-9); ``--old`` does not reach the Dask path (run
the old code for its numbers).
Measured in docs/evidence/prior_shift_log.md, "Repeat check on batches selected on a feature".

    nice python benchmarks/repeat_check_selected_rows.py --seeds 6     # ~2 min
    nice python benchmarks/repeat_check_selected_rows.py --seeds 6 --old
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator

sys.path.insert(0, str(Path(__file__).parent))
from feature_selected_batches import feature_cut_batches, load  # noqa: E402

import probwrap.shift._repeats as _rep  # noqa: E402
from probwrap import PriorShiftWrapper  # noqa: E402
from probwrap.shift import RepeatedRowsWarning  # noqa: E402

SETS = ("Arrests", "acs12", "Pima", "Mroz", "star98", "HealthInsurance", "breast_cancer")


def batches(X: pd.DataFrame, y: np.ndarray, rest: np.ndarray, rng, n_prior: int) -> list:
    out = []
    for _, b in feature_cut_batches(X, rest, rng, (("gt", 50), ("gt", 70), ("lt", 30), ("lt", 15))):
        out.append(("feature", b))
        if b.size >= 100:
            out.append(("repeat-feature", rng.choice(b[:100], 200, replace=True)))
    i1, i0 = rest[y[rest] == 1], rest[y[rest] == 0]
    for _ in range(n_prior):
        n = int(rng.integers(250, 401))
        k1 = min(int(rng.binomial(n, rng.uniform(0.15, 0.85))), i1.size)
        b = np.concatenate([rng.choice(i1, k1, replace=False),
                            rng.choice(i0, min(n - k1, i0.size), replace=False)])
        out.append(("prior", b))
        pool = rng.choice(b, min(150, b.size), replace=False)
        out.append(("repeat-prior", rng.choice(pool, 300, replace=True)))
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--prior-batches", type=int, default=8)
    ap.add_argument("--sets", default=",".join(SETS))
    ap.add_argument("--old", action="store_true")
    ap.add_argument("--seed-base", type=int, default=5000)
    ap.add_argument("--dask", action="store_true")
    a = ap.parse_args()
    if a.old:
        _rep.selection_rate = lambda *args, **kw: None
    rows = []
    for name in a.sets.split(","):
        X, y = load(name)
        X = X.fillna(X.median())
        for seed in range(a.seeds):
            rng = np.random.default_rng(a.seed_base + seed)
            idx = rng.permutation(y.size)
            tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
            model = HistGradientBoostingClassifier(max_iter=100, random_state=seed)
            model.fit(X.iloc[tr], y[tr])
            wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=seed)
            wrapper.fit(X.iloc[lab], y[lab])
            for kind, b in batches(X, y, rest, rng, a.prior_batches):
                said, pval = _adapt(wrapper, X.iloc[b])
                row = dict(set=name, seed=seed, kind=kind, rep=bool(said))
                if a.dask:
                    import dask.dataframe as dd

                    said_d, pval_d = _adapt(wrapper, dd.from_pandas(X.iloc[b], npartitions=2))
                    row.update(dask_rep=bool(said_d), differ=said_d != said,
                               p_differ=not np.isclose(pval_d, pval, rtol=1e-9, atol=0))
                rows.append(row)
    d = pd.DataFrame(rows)
    t = d.groupby(["set", "kind"]).rep.agg(["sum", "count"]).unstack("kind")
    pd.set_option("display.width", 200)
    print(t)
    print(d.groupby("kind").rep.agg(["sum", "count"]))
    if a.dask:
        print("Dask: warned, warning differs from memory's, mixture p-value differs")
        print(d.groupby("kind")[["dask_rep", "differ", "p_differ"]].sum())


def _adapt(wrapper, rows) -> tuple[list, float]:
    """The words of ``adapt``'s RepeatedRowsWarning(s) and its mixture-check p-value."""
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        fitted = wrapper.adapt(rows)
    said = [str(r.message) for r in rec if r.category is RepeatedRowsWarning]
    return said, float(fitted.prior_estimate_.mixture_misfit_pvalue)


if __name__ == "__main__":
    main()
