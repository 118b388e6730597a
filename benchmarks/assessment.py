"""Calibration assessment: do the tests reject at their nominal rate, and is it fast?

1. **Rejection rates under perfect calibration** (``--only=tests``). Each repetition draws
   ``n = 500`` rows. Target: every rate at the 5 % level within 5 % +- 1 % over 2,000 repetitions
   (Monte-Carlo standard error sqrt(0.05 * 0.95 / 2000) = 0.49 points, so +- 1 point is about
   2 SE; a rate outside is a real departure at the 5 % level of its own).

   - *Hosmer-Lemeshow, setting="fitted"*: two Gaussian features, outcomes drawn from a true
     logistic model, a logistic regression (no penalty) fitted on the same rows supplies the
     forecasts; 10 groups, ``G - 2 = 8`` degrees of freedom (the 1980 setting).
   - *Hosmer-Lemeshow, setting="held_out"*: the forecasts are the true probabilities (uniform on
     [0.02, 0.98]), nothing is fitted; ``G = 10`` degrees of freedom.
   - *Hosmer-Lemeshow, held-out forecasts judged with G - 2*: shown to make the point that the
     degrees of freedom must match the setting (expected about 11 %, not a target).
   - *Spiegelhalter's Z* on the true probabilities (two-sided).

   Also printed: the mean of the debiased squared calibration error (should be about 0; Monte-
   Carlo SE printed beside it) against the plug-in squared error (biased upwards), and the
   mean smooth ECE.
2. **Speed** (``--only=speed``): smooth ECE, Hosmer-Lemeshow and Spiegelhalter on 10^6 rows,
   beside scikit-learn's ``brier_score_loss`` on the same rows (a single pass over the data).
   Target: smooth ECE within 50 x the Brier score's time (it sorts nothing but runs an FFT
   bandwidth search); the two tests within 20 x.

3. **Multicalibration** (``--only=multicalibration``): forecasts off by +0.12 for one of three
   size classes and by -0.05 for one of two depots; ``MulticalibrationMap(alpha=0.02)`` fitted
   on 8,000 rows, judged on 8,000 new rows. Printed: the largest |mean residual| over the
   checked (grouping, value, bin) cells on the fitted and on the new rows, before and after, and
   the held-out Brier score and log loss. Target: fitted rows within alpha (the guarantee); on
   new rows, the largest cell gap and both scores improve.

Run: ``nice -n 10 python benchmarks/assessment.py`` (about 6 minutes on one shared core) or
``--quick`` (500 repetitions; rates then only indicative, SE about 1 point; about 1.5 minutes).
"""

from __future__ import annotations

import sys
import time
import warnings

import numpy as np
from scipy.special import expit
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss

from probwrap.metrics import (
    debiased_calibration_error,
    hosmer_lemeshow_test,
    smooth_calibration_error,
    spiegelhalter_z_test,
)


def rejection_rates(n_rep: int, n: int = 500, seed: int = 0) -> None:
    rng = np.random.default_rng(seed)
    reject = {"hl_fitted": 0, "hl_held_out": 0, "hl_held_out_wrong_dof": 0, "spiegelhalter": 0}
    debiased, plugin, smooth = [], [], []
    for _ in range(n_rep):
        # development setting: forecasts from a logistic model fitted on the same rows
        x = rng.normal(size=(n, 2))
        y = (rng.uniform(size=n) < expit(-0.5 + x @ np.array([1.0, -0.7]))).astype(int)
        fitted = LogisticRegression(C=1e12).fit(x, y).predict_proba(x)[:, 1]
        reject["hl_fitted"] += hosmer_lemeshow_test(y, fitted, setting="fitted").pvalue < 0.05
        # held-out setting: the true probabilities themselves
        p = rng.uniform(0.02, 0.98, size=n)
        y = (rng.uniform(size=n) < p).astype(int)
        reject["hl_held_out"] += hosmer_lemeshow_test(y, p, setting="held_out").pvalue < 0.05
        reject["hl_held_out_wrong_dof"] += hosmer_lemeshow_test(y, p, setting="fitted").pvalue < 0.05
        reject["spiegelhalter"] += spiegelhalter_z_test(y, p).pvalue < 0.05
        debiased.append(debiased_calibration_error(y, p, squared=True))
        bins = np.minimum((np.argsort(np.argsort(p)) * 10) // n, 9)
        obs = np.bincount(bins, weights=y, minlength=10) / np.bincount(bins, minlength=10)
        pred = np.bincount(bins, weights=p, minlength=10) / np.bincount(bins, minlength=10)
        plugin.append(float(np.mean((obs - pred) ** 2)))
        smooth.append(smooth_calibration_error(y, p))
    se = np.sqrt(0.05 * 0.95 / n_rep)
    print(f"Rejection rate at the 5 % level, perfectly calibrated forecasts, n = {n}, "
          f"{n_rep} repetitions (MC SE {100 * se:.2f} points); target 5 % +- 1 %")
    targets = {"hl_fitted": True, "hl_held_out": True, "hl_held_out_wrong_dof": False,
               "spiegelhalter": True}
    for key, count in reject.items():
        rate = count / n_rep
        mark = ("met" if abs(rate - 0.05) <= 0.01 else "NOT MET") if targets[key] else "(no target)"
        print(f"  {key:<24s} {100 * rate:5.2f} %   {mark}")
    d = np.asarray(debiased)
    print(f"Debiased squared calibration error: mean {d.mean():.2e} (MC SE "
          f"{d.std(ddof=1) / np.sqrt(n_rep):.1e}; true value 0); plug-in squared error mean "
          f"{np.mean(plugin):.2e}")
    print(f"Smooth ECE of calibrated forecasts, n = {n}: mean {np.mean(smooth):.4f}")


def speed(n: int = 1_000_000, repeat: int = 3) -> None:
    rng = np.random.default_rng(1)
    p = rng.uniform(0.01, 0.99, size=n)
    y = (rng.uniform(size=n) < p).astype(int)

    def best(fn) -> float:
        times = []
        for _ in range(repeat):
            t = time.perf_counter()
            fn()
            times.append(time.perf_counter() - t)
        return min(times)

    base = best(lambda: brier_score_loss(y, p))
    print(f"Speed on {n:,} rows (best of {repeat}); scikit-learn brier_score_loss {base:.3f} s")
    for name, fn, target in (
        ("smooth_calibration_error", lambda: smooth_calibration_error(y, p), 50),
        ("hosmer_lemeshow_test", lambda: hosmer_lemeshow_test(y, p), 20),
        ("spiegelhalter_z_test", lambda: spiegelhalter_z_test(y, p), 20),
    ):
        t = best(fn)
        ratio = t / base
        print(f"  {name:<26s} {t:.3f} s  ratio {ratio:6.1f} (target <= {target}: "
              f"{'met' if ratio <= target else 'NOT MET'})")


def _cell_gap(p, y, g, n_bins=10, min_share=0.01) -> float:
    bins = np.minimum((p * n_bins).astype(int), n_bins - 1)
    worst = 0.0
    for b in range(n_bins):
        masks = [bins == b] + [(bins == b) & (g[:, j] == v) for j in range(g.shape[1])
                               for v in np.unique(g[:, j])]
        for m in masks:
            if m.sum() >= min_share * len(p):
                worst = max(worst, abs(float(np.mean(y[m] - p[m]))))
    return worst


def multicalibration() -> None:
    from probwrap.calibration import MulticalibrationMap
    from probwrap.metrics import brier_score, log_loss

    def draw(n, seed):
        rng = np.random.default_rng(seed)
        size = rng.choice(["light", "medium", "heavy"], size=n)
        depot = rng.choice(["north", "south"], size=n)
        p = rng.uniform(0.02, 0.7, size=n)
        truth = np.clip(p + np.where(size == "heavy", 0.12, 0.0)
                        - np.where(depot == "south", 0.05, 0.0), 0.01, 0.99)
        return p, (rng.uniform(size=n) < truth).astype(int), np.column_stack((size, depot))

    p, y, g = draw(8000, 0)
    p2, y2, g2 = draw(8000, 1)
    m = MulticalibrationMap(alpha=0.02).fit(p, y, g)
    q, q2 = m.predict(p, g), m.predict(p2, g2)
    print(f"Multicalibration (alpha 0.02, {len(m.corrections_)} corrections, converged "
          f"{m.converged_})")
    print(f"  largest cell gap, fitted rows: before {_cell_gap(p, y, g):.3f}, after "
          f"{_cell_gap(q, y, g):.3f} (target <= 0.02)")
    print(f"  largest cell gap, new rows:    before {_cell_gap(p2, y2, g2):.3f}, after "
          f"{_cell_gap(q2, y2, g2):.3f}")
    print(f"  held-out Brier {brier_score(y2, p2):.4f} -> {brier_score(y2, q2):.4f}; log loss "
          f"{log_loss(y2, p2):.4f} -> {log_loss(y2, q2):.4f}")


def main(argv: list[str]) -> None:
    quick = "--quick" in argv
    only = next((a.split("=", 1)[1] for a in argv if a.startswith("--only=")), None)
    warnings.simplefilter("error", RuntimeWarning)
    if only in (None, "tests"):
        rejection_rates(500 if quick else 2000)
    if only in (None, "speed"):
        speed(200_000 if quick else 1_000_000)
    if only in (None, "multicalibration"):
        multicalibration()


if __name__ == "__main__":
    main(sys.argv[1:])
