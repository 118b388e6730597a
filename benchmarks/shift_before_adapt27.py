"""PriorShiftWrapper before ``adapt`` where the likelihood-ratio test keeps the model's own
probabilities: one fit per draw, and the test log loss of the outputs the session-27 rules
choose between (docs/evidence/prior_shift_log.md, "Before adapt: the session-27 changes").

For every frozen draw: scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` (``sig``), the
model's own probabilities (``own``), the wrapper's output (``cur``), the kept output (the
model's own floored, ``ownf``), the map (``map``) and the map chosen by folds (``auto``); with the
test's p-value, the map's scale, the reason the small-set rule gives, whether the probabilities
lie on a coarse grid, and the map's intercept information (``info_map``,
:func:`probwrap._prior_shift_output_map.intercept_information`).

Sources (``--src``): ``h23``, ``h24``, ``h26`` (the sets of ``hunt23_sweep.py``,
``hunt24_sweep.py``, ``hunt26_sweep.py``; hunt23's frozen draw: a model fitted on 30 % of the
rows, at most 300, then 20 or 40 stratified labelled rows), ``tiny`` (the 17 tasks, three models
and draws of ``shift_calibration_tiny.py``, same random stream) and ``safety``
(tests/test_prior_shift_safety.py's breast-cancer draws of 20 rows). Models for the hunt sets:
logistic regression, naive Bayes, a forest of 50 trees (hunt21_sweep.py's) and a 15-neighbour
vote on scaled columns.

Run: ``nice python benchmarks/shift_before_adapt27.py --src h23 --out /tmp/h23.csv`` (about
15 minutes at a load of 20), ``--src h24 --seeds 0,1,2``, ``--src tiny``, ``--src safety
--draws 30``; ``--summary A.csv,B.csv`` prints the rules' tables from saved draws.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

sys.path.insert(0, str(Path(__file__).parent))

from probwrap import PriorShiftWrapper  # noqa: E402
from probwrap._prior_shift_output_map import (  # noqa: E402
    contradicted_confidence,
    fit_output_map,
    intercept_information,
    under_confident_grid,
)


def _ll(y: np.ndarray, p: np.ndarray) -> float:
    return float(-np.mean(np.log(np.clip(p[np.arange(y.shape[0]), y], 1e-15, 1.0))))


def _gm(x) -> float:
    return float(np.exp(np.mean(np.log(np.asarray(x, dtype=float)))))


def one_draw(m, Xc, yc, Xt, yt, seed: int, **info) -> dict:
    """Fit the wrapper once on the labelled rows of a fitted model ``m`` and score every output."""
    classes = m.classes_
    yti, yci = np.searchsorted(classes, yt), np.searchsorted(classes, yc)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cv = int(min(5, np.bincount(yci).min()))
        sig = CalibratedClassifierCV(FrozenEstimator(m), method="sigmoid", cv=cv,
                                     ensemble=False).fit(Xc, yc)
        psw = PriorShiftWrapper(FrozenEstimator(m), random_state=seed, n_resamples=0).fit(Xc, yc)
        out = psw.predict_proba(Xt)
    cal = psw.prior_estimator_.calibrator_
    p, yi, w = psw.prior_estimator_._src
    pt = m.predict_proba(Xt)
    k = len(classes)
    row = dict(info, n=len(yc), seed=seed, k=k, sig=_ll(yti, sig.predict_proba(Xt)),
               own=_ll(yti, pt), cur=_ll(yti, out), kept=bool(cal.identity_kept_),
               scale=float(np.ravel(cal.scale_)[0]), pval=float(cal.identity_pvalue_),
               reason=str(contradicted_confidence(p, yi, w)),
               grid=bool(k == 2 and under_confident_grid(p, w, np.inf)))
    saved, kept = getattr(cal, "output_map_", None), cal.identity_kept_
    cal.output_map_ = None
    cal.identity_kept_ = True
    row["ownf"] = _ll(yti, cal.predict_output(pt))
    cal.identity_kept_ = False
    row["map"] = _ll(yti, cal.predict(pt))
    cal.identity_kept_, cal.output_map_ = kept, saved
    if k == 2:
        row["info_map"] = intercept_information(cal.predict(p), w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        chosen = psw.output_map_ if psw.output_map_ is not None else fit_output_map(p, yi, None, seed, "x")
    row["auto"] = _ll(yti, chosen.predict_proba(pt))
    return row


def hunt_draws(src: str, sets: str, models: str, sizes: str, seeds: str):
    import hunt21_sweep as H
    import hunt23_sweep as A

    tasks = __import__({"h23": "hunt23_sweep", "h24": "hunt24_sweep",
                        "h26": "hunt26_sweep"}[src]).tasks()
    if sets:
        tasks = [t for t in tasks if t.name in sets.split(",")]
    ms = dict(H.models())
    ms["knn"] = make_pipeline(StandardScaler(), KNeighborsClassifier(15))
    for t in tasks:
        if getattr(t, "kind", "plain") == "kofn" or getattr(t, "w", None) is not None:
            continue
        for n in (int(s) for s in sizes.split(",")):
            for s in (int(s) for s in seeds.split(",")):
                tr, cal, te = A.draw(t, n, "frozen", s)
                if len(cal) < 0.8 * n or len(te) < 50:
                    continue
                for mname in models.split(","):
                    try:
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            m = clone(ms[mname]).fit(t.X.iloc[tr], t.y[tr])
                    except Exception:  # noqa: BLE001 - a model that cannot fit this set
                        continue
                    yc, yt = t.y[cal], t.y[te]
                    if not np.array_equal(np.unique(yc), m.classes_):
                        continue
                    keep = np.isin(yt, m.classes_)
                    if np.bincount(np.searchsorted(m.classes_, yc)).min() < 2:
                        continue
                    yield m, t.X.iloc[cal], yc, t.X.iloc[te][keep], yt[keep], s, \
                        dict(src=src, set=t.name, model=mname)


def tiny_draws(draws: int):
    import shift_calibration_tiny as ST

    rng = np.random.default_rng(5)
    for name, X, y in ST.data_sets():
        for mname, make in ST.MODELS.items():
            order = rng.permutation(y.shape[0])
            n_fit = min(y.shape[0] // 4, 600)
            model = make().fit(X[order[:n_fit]], y[order[:n_fit]])
            pool = order[n_fit:]
            for n in ST.SIZES:
                for d in range(draws):
                    perm = rng.permutation(pool)
                    lab, test = perm[:n], perm[n:][:1500]
                    if np.unique(y[lab]).size < 2 or np.bincount(y[lab]).min() < 2:
                        continue
                    yield model, X[lab], y[lab], X[test], y[test], d, \
                        dict(src="tiny", set=name, model=mname)


def safety_draws(draws: int):
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(0).permutation(len(y))
    fit, test, pool = idx[:189], idx[189:378], idx[378:]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=300)).fit(X[fit], y[fit])
    for s in range(draws):
        lab = np.random.default_rng(100 + s).choice(pool, 20, replace=False)
        yield model, X[lab], y[lab], X[test], y[test], s, dict(src="safety", set="bc", model="lr")


def summary(d: pd.DataFrame) -> None:
    """The rules' tables, from the columns alone (the same for draws saved by the old or the
    new code): ``before`` keeps the model's own (floored) where the test keeps it (p-value above
    0.05) unless a grid is sharpened by 1.3 or more, and otherwise gives the map; where the
    small-set rule named a reason the wrapper's output (the map chosen by folds) stands."""
    d = d[d["k"] == 2]
    free = d["reason"].isna() | (d["reason"] == "None")
    test_kept = d["pval"] > 0.05
    sharpened = d["grid"] & (d["scale"] >= 1.3)
    before = np.where(free, np.where(test_kept & ~sharpened, d["ownf"], d["map"]), d["cur"])
    base = before / d["sig"]
    print(f"{len(d)} two-class draws; over the sigmoid: geometric mean | worst | above 1.10x; "
          "above 1.10x the model's own")
    for i_min in (0.0, 1.5, 2.0, 3.0, 4.0):
        sel = free & test_kept & ~sharpened & (d["scale"] < 1) & (d["info_map"] >= i_min)
        after = np.where(sel, d["map"], before)
        new = after / d["sig"]
        own0, own1 = before / d["own"], after / d["own"]
        print(f"  kept, softened, information >= {i_min}: changed {int(sel.sum())}, "
              f"{_gm(base):.4f} | {base.max():.2f} | {int((base > 1.1).sum())} -> "
              f"{_gm(new):.4f} | {new.max():.2f} | {int((new > 1.1).sum())}; "
              f"own {int((own0 > 1.1).sum())} -> {int((own1 > 1.1).sum())}")
    grid = d[d["grid"] & free & test_kept]
    if len(grid):
        print(f"{len(grid)} grid draws the test keeps: the map from scale t on, over the sigmoid")
        for t in (1.0, 1.1, 1.2, 1.3, 1.4, 1.5, np.inf):
            new = np.where(grid["scale"] >= t, grid["map"], grid["ownf"]) / grid["sig"]
            print(f"  t = {t}: {_gm(new):.4f} | {new.max():.2f} | {int((new > 1.1).sum())}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--src", default="h23", choices=("h23", "h24", "h26", "tiny", "safety"))
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,nb,rf,knn")
    ap.add_argument("--sizes", default="20,40")
    ap.add_argument("--seeds", default="0,1,2,3")
    ap.add_argument("--draws", type=int, default=3)
    ap.add_argument("--out", default="")
    ap.add_argument("--summary", default="")
    a = ap.parse_args(argv)
    if a.summary:
        summary(pd.concat([pd.read_csv(f) for f in a.summary.split(",")], ignore_index=True))
        return
    if a.src == "tiny":
        draws = tiny_draws(a.draws)
    elif a.src == "safety":
        draws = safety_draws(a.draws)
    else:
        draws = hunt_draws(a.src, a.sets, a.models, a.sizes, a.seeds)
    rows, t0 = [], time.time()
    for m, Xc, yc, Xt, yt, seed, info in draws:
        try:
            rows.append(one_draw(m, Xc, yc, Xt, yt, seed, **info))
        except ValueError as e:  # a set whose probabilities the wrapper refuses: say so
            print(f"  {info['set']} {info['model']} seed {seed}: {e}", flush=True)
        if a.out and len(rows) % 20 == 0:
            pd.DataFrame(rows).to_csv(a.out, index=False)
    d = pd.DataFrame(rows)
    if a.out:
        d.to_csv(a.out, index=False)
    print(f"{len(d)} draws, {time.time() - t0:.0f} s")
    summary(d)


if __name__ == "__main__":
    main(sys.argv[1:])
