"""Can the spread of an unlabelled batch's scores show that they are not calibrated for the
``--source-prevalence`` given? Candidate checks, their false alarms on calibrated scores and
their hits on uncalibrated ones (session 27).

Why nothing about the spread can be a test: take any batch of scores ``s`` and EM's estimate
``q`` for it under the stated ``pi``. Re-weight the batch's rows by
``w(s) = 1 / (q s / pi + (1 - q)(1 - s) / (1 - pi))`` (Saerens, Latinne and Decaestecker 2002,
the ratio of the source to the target density of a score under prior shift). The EM equations
make the re-weighted mean equal ``pi``, so scores drawn from the re-weighted batch are
calibrated for ``pi`` (a population in which P(y = 1 | s) = s has mean score ``pi`` and no
other constraint), and shifting that population's prevalence from ``pi`` to ``q`` gives back
the batch's own score distribution exactly. Every batch with an interior EM estimate is
therefore exactly what calibrated scores under a prior shift would give, and a check of
unlabelled scores alone that keeps its false alarms at a level alpha on every calibrated
population fires with probability at most alpha on any other batch. What remains is the
boundary (EM at 0 or 1, already warned of) and the gross mean check of session 26, which is
not a test either but a bound on how far calibrated scores can move.

This script measures the candidates anyway (the brief asked for numbers): per batch, from the
scores and ``pi`` alone,

- ``slope_ratio``: the discrimination slope implied by the EM twin (mean score of positives
  minus that of negatives in the re-weighted batch) over the slope the batch's variance would
  give at no shift (Var(s) / (m (1 - m))); the mean/variance pair the brief suggested;
- ``edge_share``: the share of scores at exactly 0 or 1 (tree votes; no calibration map in
  probwrap or scikit-learn's sigmoid gives them);
- ``mean_factor``: the session-26 rule (batch mean 2x or 1/2 the rarer class's share, p < 0.05).

Sets: scikit-learn's breast cancer, MASS Pima, ISLR Default (3,000 rows), statsmodels' fair,
carData Mroz, AER ResumeNames; 4 random halves each; models fitted on one half, the stated
source prevalence their training share; batches the other half as it is, or resampled so
that the rarer class doubles or halves, 5 draws each (and, apart, x4 and x1/4 of it). "harm": the estimate's log-odds off the
batch's true share by more than 0.5.

Run: PYTHONPATH=$PWD python benchmarks/cli_source_spread27.py
"""

import warnings

import numpy as np
import pandas as pd
from cli_source_calibration import logistic, sets  # the same six sets and pipeline
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import RandomForestClassifier
from sklearn.naive_bayes import GaussianNB

from probwrap.cli._prevalence_numbers import prevalence_from_source

MODELS = {
    "lr_cal": lambda: CalibratedClassifierCV(logistic(), method="sigmoid", cv=5),
    "rf_cal": lambda: CalibratedClassifierCV(
        RandomForestClassifier(100, min_samples_leaf=3, random_state=0), method="sigmoid", cv=5),
    "rf_iso": lambda: CalibratedClassifierCV(
        RandomForestClassifier(100, min_samples_leaf=3, random_state=0), method="isotonic", cv=5),
    "nb": GaussianNB,
    "lr_balanced": lambda: logistic(class_weight="balanced"),
    "rf": lambda: RandomForestClassifier(100, random_state=0),
}


#: how the rarer class's share is moved (x4 and x1/4: only to see what a spread check makes
#: of larger real shifts of calibrated scores; its cut-offs are set without them)
SHIFTS = {"none": 1.0, "doubled": 2.0, "halved": 0.5, "x4": 4.0, "quartered": 0.25}


def batch(rng, yt, pi, shift):
    n = yt.shape[0]
    if shift == "none":
        return rng.choice(n, n)
    rare = 1 if pi < 0.5 else 0
    share = min(min(pi, 1 - pi) * SHIFTS[shift], 0.6 if SHIFTS[shift] <= 2 else 0.9)
    pos, neg = np.flatnonzero(yt == rare), np.flatnonzero(yt != rare)
    k = int(share * n)
    return np.concatenate([rng.choice(pos, k), rng.choice(neg, n - k)])


def twin_slope(s, pi, q):
    """Discrimination slope of the calibrated population the batch would come from under a
    prior shift from ``pi`` to ``q`` (the batch re-weighted by the density ratio)."""
    w = 1.0 / (q * s / pi + (1 - q) * (1 - s) / (1 - pi))
    return np.sum(w * s * s) / np.sum(w * s) - np.sum(w * s * (1 - s)) / np.sum(w * (1 - s))


def main():
    rows = []
    for name, X, y in sets():
        for seed in range(4):
            rng = np.random.default_rng(seed)
            idx = rng.permutation(len(y))
            tr, te = idx[: len(y) // 2], idx[len(y) // 2:]
            pi = float(y[tr].mean())
            for mname, make in MODELS.items():
                p = make().fit(X[tr], y[tr]).predict_proba(X[te])[:, 1]
                for shift in SHIFTS:
                    for _draw in range(5):
                        sel = batch(rng, y[te], pi, shift)
                        s = p[sel]
                        with warnings.catch_warnings(record=True) as caught:
                            warnings.simplefilter("always")
                            out = prevalence_from_source(s, pi, n_resamples=0)
                        q = float(out["prevalence"])
                        m, v = float(s.mean()), float(s.var())
                        q_in = min(max(q, 1e-6), 1 - 1e-6)
                        rows.append(dict(
                            set=name, seed=seed, model=mname, shift=shift, pi=pi,
                            true=y[te][sel].mean(), est=q,
                            mean_factor=any("Calibrated scores move less" in str(w.message)
                                            for w in caught),
                            edge=any("at the edge" in str(w.message) for w in caught),
                            slope_ratio=twin_slope(s, pi, q_in) / max(v / (m * (1 - m)), 1e-12),
                            edge_share=float(np.mean((s == 0) | (s == 1)))))
    df = pd.DataFrame(rows)
    est = df.est.clip(1e-4, 1 - 1e-4)
    df["harm"] = (np.log(est / (1 - est)) - np.log(df.true / (1 - df.true))).abs() > 0.5
    df["kind"] = np.where(df.model.str.endswith(("_cal", "_iso")), "calibrated", "uncalibrated")
    strong = df[df["shift"].isin(["x4", "quartered"])].copy()
    df = df[~df["shift"].isin(["x4", "quartered"])].copy()
    df["error"] = (np.log(est / (1 - est)) - np.log(df.true / (1 - df.true))).abs()
    cal = df[df.kind == "calibrated"]
    unc = df[df.kind == "uncalibrated"]
    print(f"{len(cal)} calibrated batches, {len(unc)} uncalibrated "
          f"({unc.harm.mean():.0%} harmed; calibrated {cal.harm.mean():.0%} harmed)")
    # slope_ratio: two-sided cut-offs set on the calibrated batches' own 1 % / 99 % quantiles
    # (the most favourable choice for the check: fitted on the very batches it is scored on)
    lo, hi = np.quantile(cal.slope_ratio, [0.01, 0.99])
    df["slope_flag"] = (df.slope_ratio < lo) | (df.slope_ratio > hi)
    df["edge_flag"] = df.edge_share >= 0.01
    print(f"slope_ratio cut-offs (calibrated 1 %/99 % quantiles): {lo:.3f}, {hi:.3f}")
    table = []
    for rule in ("mean_factor", "edge", "slope_flag", "edge_flag"):
        for kind, part in (("calibrated", df[df.kind == "calibrated"]),
                           ("uncalibrated", df[df.kind == "uncalibrated"])):
            table.append(dict(rule=rule, scores=kind, fires=part[rule].mean(),
                              fires_if_harmed=part[rule][part.harm].mean(),
                              fires_if_not_harmed=part[rule][~part.harm].mean()))
    print(pd.DataFrame(table).round(3).to_string(index=False))
    print("\nper model (share of batches flagged / harmed):")
    g = df.groupby("model")
    print(pd.DataFrame({"harmed": g.harm.mean(), "median_error": g.error.median(), "mean_factor": g.mean_factor.mean(),
                        "slope_flag": g.slope_flag.mean(), "edge_flag": g.edge_flag.mean(),
                        "edge_share_median": g.edge_share.median(),
                        "slope_ratio_median": g.slope_ratio.median()}).round(3).to_string())
    fired = df[(df.kind == "calibrated") & df.mean_factor]
    print("\ncalibrated batches where the session-26 mean rule fired (set, model, shift: count; "
          "median true share vs source):")
    print(fired.groupby(["set", "model", "shift"]).agg(
        n=("true", "size"), true=("true", "median"), pi=("pi", "median"),
        est=("est", "median")).round(3).to_string())
    rf = df[df.model == "rf"]
    print("\nraw forest, by set (harmed, edge_flag, slope_flag, mean_factor):")
    print(rf.groupby("set")[["harm", "edge_flag", "slope_flag", "mean_factor"]].mean()
          .round(2).to_string())
    for flag in (True, False):
        part = df[(df.kind == "uncalibrated") & (df.edge_flag == flag)]
        print(f"uncalibrated batches with edge_flag={flag}: {len(part)}, harmed "
              f"{part.harm.mean():.0%}, median log-odds error {part.error.median():.2f}")
    print(df.groupby(["model", "shift"]).harm.mean().unstack().round(2).to_string())
    res = df[(df.set == "resume") & (df.model == "lr_cal")]
    strong["slope_flag"] = (strong.slope_ratio < lo) | (strong.slope_ratio > hi)
    print("\ncalibrated scores, larger real shifts of the rarer class (x4, x1/4), share flagged:")
    part = strong[strong.kind == "calibrated"]
    print(part.groupby(["model", "shift"])[["slope_flag", "mean_factor", "edge"]].mean()
          .round(3).to_string())
    print(f"\nResumeNames, calibrated logistic regression: {res.harm.mean():.0%} harmed, "
          f"slope flag {res.slope_flag.mean():.0%}, edge flag {res.edge_flag.mean():.0%}")


if __name__ == "__main__":
    main()
