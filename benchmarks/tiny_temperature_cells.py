"""``CalibrationWrapper(method="auto")``'s temperature choice on hunt30_sweep.py's binary sets:
per cell the map chosen, the candidates' cross-validated log loss and its standard error
(``method_scores_``), the fitted temperature, Platt's fitted slope, how the wrapper predicts
(``predicted_with_``), and the test log loss of ``auto``, of ``method="platt"`` and of
``method="temperature"`` beside scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``.

Cells: ``hunt24_sweep.draw``'s cross-fitted and frozen splits, 30 and 60 labelled rows where
the set has room, logistic regression, naive Bayes, forest, boosting, seeds 0-1 (no cost
columns). Run from the repository root: ``PYTHONPATH=$PWD nice python
benchmarks/tiny_temperature_cells.py --sets water,bluejays,election08,leuk,cafe --csv F``
(about two minutes here). Results: docs/evidence/small_data_log.md, "Temperature on tiny
sets (session 30)".
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

from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402
import hunt28_sweep as P  # noqa: E402
import hunt30_sweep as H30  # noqa: E402


def cells(sets: list[str]) -> pd.DataFrame:
    ms = H30.models()
    rows = []
    for t in [t for t in H30.tasks() if t.name in sets]:
        for mode in ("cross", "frozen"):
            for n_cal in H30.sizes_for(t, mode):
                for m in ("lr", "nb", "rf", "gb"):
                    for s in (0, 1):
                        tr, cal, te = B.draw(t, n_cal, mode, s)
                        X, y = t.X, t.y
                        Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                        classes = np.unique(yc)
                        Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                        frozen = mode == "frozen"
                        fitted = clone(ms[m]).fit(X.iloc[tr], y[tr]) if frozen else None

                        def make(fitted=fitted, m=m, frozen=frozen):
                            return FrozenEstimator(fitted) if frozen else clone(ms[m])

                        sig = P._sig(make(), Xc, yc, None, frozen)
                        if sig is None:
                            continue
                        r = {"set": t.name, "model": m, "mode": mode, "n": len(cal), "seed": s,
                             "sig": H.log_loss(yt, sig.predict_proba(Xt), classes)}
                        np.random.seed(0)  # noqa: NPY002  (random_state=None: the global state)
                        with warnings.catch_warnings(record=True) as caught:
                            warnings.simplefilter("always")
                            est = CalibrationWrapper(make()).fit(Xc, yc)
                        r["warn"] = ",".join(sorted({
                            c.category.__name__ for c in caught
                            if c.category.__module__.startswith("probwrap")}))
                        r["cal"] = H.log_loss(yt, est.predict_proba(Xt), classes)
                        r["method"] = est.method_
                        for nm, (loss, se) in est.method_scores_.items():
                            r[f"cv_{nm}"], r[f"se_{nm}"] = loss, se
                        r["T"] = getattr(est.calibrator_, "temperature_", np.nan)
                        r["predicted_with"] = est.predicted_with_
                        for nm in ("platt", "temperature"):
                            np.random.seed(0)  # noqa: NPY002
                            e2 = CalibrationWrapper(make(), method=nm).fit(Xc, yc)
                            r[nm] = H.log_loss(yt, e2.predict_proba(Xt), classes)
                            if nm == "platt":
                                r["slope"] = getattr(e2.calibrator_, "slope_", np.nan)
                        rows.append(r)
    return pd.DataFrame(rows)


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sets", default="water,bluejays,election08,leuk,cafe")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    warnings.simplefilter("ignore", FutureWarning)
    d = cells(a.sets.split(","))
    r = d["cal"] / d["sig"]
    quiet = (r > 1.10) & (d["cal"] - d["sig"] > 0.01) & ~d["warn"].str.contains("Unverified|FewClass")
    print(f"{len(d)} cells: auto / sigmoid geometric mean {np.exp(np.log(r).mean()):.4f}, worst {r.max():.3f}, "
          f"quiet above 1.10x {int(quiet.sum())} ({ {k: int(v) for k, v in d['method'][quiet].value_counts().items()} })")
    for nm in ("platt", "temperature"):
        print(f"  method={nm!r}: geometric mean {np.exp(np.log(d[nm] / d['sig']).mean()):.4f}")
    if a.csv:
        d.to_csv(a.csv, index=False)


if __name__ == "__main__":
    main(sys.argv[1:])
