"""Batches resampled with replacement: coverage of the prior interval and RepeatedRowsWarning.

The two silent misses of ``benchmarks/hunt22_sweep.py`` (docs/small_data.md, twenty-second
session; docs/evidence/prior_shift_log.md, "Confident misses on real sets") came from its batches: 400 rows
drawn *with replacement* from the test half. Per seeded half (the sweep's split: a stratified
half fits ``PriorShiftWrapper`` around a cross-fitted logistic regression on scaled columns) and
factor (0.5, 1, 2 times the prevalence), four batches are adapted to:

* ``with``: the sweep's own draw (400 rows with replacement from the test half);
* ``with_cells``: the same rows with ``cells=`` grouping identical rows (the remedy the warning
  names);
* ``without``: rows drawn without replacement from the test half (as many as its classes allow,
  at most 400);
* ``fresh`` (nwtco only): 400 rows drawn without replacement from the 2,828 rows of R's
  survival::nwtco that the sweep's 1,200-row sample left out.

Printed per kind and factor: coverage of the 95 % interval, the share of draws that raised
``RepeatedRowsWarning``, the misses and how many drew no warning at all.

``--dask`` (session 25) adapts every draw but ``with_cells`` once more as a Dask DataFrame of
two partitions read the way sets beyond 20,000 rows are read (``KEPT_ROWS`` set to 0: a tally
of binned scores for the estimate, the repeats keyed by features where the rows live and added
up by a shuffle): kinds ``<kind>_dask``. Their warning shares should equal the in-memory ones
draw for draw (printed: ``dask_disagree``), ``without`` and ``fresh`` never warning.

Run: ``nice python benchmarks/shift_repeated_rows.py [--sets phdpubs nwtco] [--seeds 50]``
(about two minutes per set and 50 seeds).
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402

from probwrap import PriorShiftWrapper  # noqa: E402


def data(which: str):
    if which == "phdpubs":
        d = H._r("AER", "PhDPublications")
        X = H._num(d.drop(columns="articles"))
        return X, (d["articles"] > 0).to_numpy().astype(int), np.arange(len(d)), np.array([], int)
    d = H._r("survival", "nwtco")
    X = H._num(d[["instit", "histol", "stage", "study", "age"]].astype({"stage": str}))
    y = d["rel"].to_numpy().astype(int)
    cap = d.sample(1200, random_state=0).index.to_numpy()  # hunt22_sweep's rows
    return X, y, cap, np.setdiff1d(np.arange(len(y)), cap)


def _adapt_dask(psw, Xb):
    """``psw.adapt`` on ``Xb`` as a Dask DataFrame read as a set beyond 20,000 rows; the
    warnings' class names."""
    import dask
    import dask.dataframe as dd

    import probwrap.scale._tally as tally_module

    kept, tally_module.KEPT_ROWS = tally_module.KEPT_ROWS, 0
    try:
        with dask.config.set(scheduler="synchronous"), warnings.catch_warnings(
                record=True) as ws:
            warnings.simplefilter("always")
            psw.adapt(dd.from_pandas(Xb, npartitions=2))
    finally:
        tally_module.KEPT_ROWS = kept
    return sorted({type(x.message).__name__ for x in ws})


def run(which: str, seeds: range, with_dask: bool = False) -> pd.DataFrame:
    X, y, cap, fresh = data(which)
    rows = []
    for seed in seeds:
        t = H.Task(which, X.iloc[cap].reset_index(drop=True), y=y[cap])
        tr, te = H.split(t, seed)
        Xte, yte = t.X.iloc[te].reset_index(drop=True), t.y[te]
        psw = PriorShiftWrapper(clone(H.models()["lr"]), random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw.fit(t.X.iloc[tr], t.y[tr])
        rng, rng2 = np.random.default_rng(1000 + seed), np.random.default_rng([seed, 5])
        for factor in (0.5, 1.0, 2.0):
            b, _ = H.resample(yte, None, [0, 1], factor, rng)
            share = min(0.95, max(0.02, yte.mean() * factor))
            pos, neg = np.flatnonzero(yte == 1), np.flatnonzero(yte == 0)
            size = int(min(400, len(pos) / share, len(neg) / (1 - share)))
            k = int(round(share * size))
            b2 = np.concatenate([rng2.choice(pos, k, replace=False),
                                 rng2.choice(neg, size - k, replace=False)])
            draws = [("with", Xte.iloc[b], yte[b], False), ("with_cells", Xte.iloc[b], yte[b], True),
                     ("without", Xte.iloc[b2], yte[b2], False)]
            if len(fresh):
                yf = y[fresh]
                kf = int(round(min(0.95, y[cap][tr].mean() * factor) * 400))
                bf = np.concatenate([rng2.choice(fresh[yf == 1], kf, replace=False),
                                     rng2.choice(fresh[yf == 0], 400 - kf, replace=False)])
                draws.append(("fresh", X.iloc[bf], y[bf], False))
            for kind, Xb, yb, grouped in draws:
                Xb = Xb.reset_index(drop=True)
                cells = (np.unique(Xb.to_numpy(), axis=0, return_inverse=True)[1].ravel()
                         if grouped else None)
                with warnings.catch_warnings(record=True) as ws:
                    warnings.simplefilter("always")
                    psw.adapt(Xb, cells=cells)
                caught = sorted({type(x.message).__name__ for x in ws})
                lo, hi = psw.target_prior_interval_[1]
                truth = float(yb.mean())
                rows.append(dict(set=which, seed=seed, factor=factor, kind=kind, truth=truth,
                                 est=float(psw.target_prior_[1]), lo=lo, hi=hi,
                                 cover=bool(lo - 1e-9 <= truth <= hi + 1e-9),
                                 weight=psw.adaptation_weight_, warn=",".join(caught)))
                if with_dask and not grouped:
                    caught_d = _adapt_dask(psw, Xb)
                    lo, hi = psw.target_prior_interval_[1]
                    rows.append(dict(set=which, seed=seed, factor=factor, kind=kind + "_dask",
                                     truth=truth, est=float(psw.target_prior_[1]), lo=lo, hi=hi,
                                     cover=bool(lo - 1e-9 <= truth <= hi + 1e-9),
                                     weight=psw.adaptation_weight_, warn=",".join(caught_d),
                                     memory_warned="RepeatedRowsWarning" in caught))
    return pd.DataFrame(rows)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sets", nargs="*", default=["phdpubs", "nwtco"])
    ap.add_argument("--seeds", type=int, default=50)
    ap.add_argument("--out")
    ap.add_argument("--dask", action="store_true",
                    help="adapt every draw as Dask rows read as beyond 20,000 rows too")
    a = ap.parse_args()
    df = pd.concat([run(s, range(a.seeds), a.dask) for s in a.sets], ignore_index=True)
    if a.out:
        df.to_csv(a.out, index=False)
    df["repeated"] = df.warn.str.contains("RepeatedRowsWarning")
    df["silent_miss"] = ~df.cover & (df.warn == "")
    df["miss"] = ~df.cover
    print(df.groupby(["set", "kind", "factor"]).agg(
        cover=("cover", "mean"), warned_repeats=("repeated", "mean"), misses=("miss", "sum"),
        silent_misses=("silent_miss", "sum"), draws=("cover", "size")).to_string())
    if "memory_warned" in df:
        d = df[df.kind.str.endswith("_dask")]
        disagree = (d.repeated != d.memory_warned.astype(bool)).groupby([d.set, d.kind]).sum()
        print("\ndask_disagree (draws whose Dask warning differs from memory's):")
        print(disagree.to_string())


if __name__ == "__main__":
    main()
