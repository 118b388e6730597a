"""Calibration beside scikit-learn: CalibrationWrapper vs CalibratedClassifierCV.

Both calibrate the same frozen model on the same held-out rows and are scored on the same fresh
rows. Printed per data set: log loss, Brier score, ECE (15 equal-mass bins) and fit time for every
method, and the ratio of probwrap's ``auto`` log loss to scikit-learn's best method. Then the
isotonic fit at 10^6 rows against one ``np.argsort`` of the scores.

Run: ``python benchmarks/calibration.py`` (about a minute on two cores; ``--quick`` skips 10^6).
"""

from __future__ import annotations

import sys
import time

import numpy as np
import sklearn
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_digits, make_classification
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper
from probwrap.calibration import IsotonicMap, proba_to_log_odds
from probwrap.datasets import make_parcels
from probwrap.metrics import brier_score, expected_calibration_error, log_loss

SK_VERSION = tuple(int(p) for p in sklearn.__version__.split(".")[:2])


def datasets(quick: bool):
    X, y = load_digits(return_X_y=True)
    yield "digits: is it an 8? (1,797 rows, bundled)", X, (y == 8).astype(int), GaussianNB()
    X, y = make_classification(10_000, n_features=20, n_informative=6, weights=[0.9], flip_y=0.03, random_state=0)
    yield "synthetic 10^4, 10% positive", X, y, HistGradientBoostingClassifier(max_iter=100, random_state=0)
    p = make_parcels(100_000, random_state=0)
    yield "parcels 10^5, ~4% damaged (demo)", p.data, p.target, HistGradientBoostingClassifier(max_iter=100, random_state=0)
    if not quick:
        X, y = make_classification(1_000_000, n_features=10, n_informative=4, weights=[0.8], flip_y=0.05, random_state=1)
        yield "synthetic 10^6, 20% positive", X, y, GaussianNB()


def evaluate(y, p):
    return (
        log_loss(y, np.column_stack([1 - p, p])),
        brier_score(y, p),
        expected_calibration_error(y, p, n_bins=15, strategy="quantile"),
    )


def timed(fn, *args):
    t = time.perf_counter()
    out = fn(*args)
    return out, time.perf_counter() - t


def main(quick: bool = False) -> None:
    sk_methods = ["sigmoid", "isotonic"] + (["temperature"] if SK_VERSION >= (1, 8) else [])
    ours = ["auto", "platt", "beta", "temperature", "isotonic", "venn_abers", "binning"]
    wins = 0
    n_sets = 0
    for name, X, y, base in datasets(quick):
        X_tr, X_rest, y_tr, y_rest = train_test_split(X, y, train_size=0.4, random_state=0, stratify=y)
        X_cal, X_te, y_cal, y_te = train_test_split(X_rest, y_rest, train_size=0.5, random_state=0, stratify=y_rest)
        base.fit(X_tr, y_tr)
        frozen = FrozenEstimator(base)
        print(f"\n{name}: {len(y_cal):,} held-out rows, {len(y_te):,} fresh rows")
        print(f"  {'library':<10}{'method':<13}{'log loss':>10}{'Brier':>10}{'ECE':>9}{'fit s':>9}")
        raw = evaluate(y_te, base.predict_proba(X_te)[:, 1])
        print(f"  {'(none)':<10}{'uncalibrated':<13}{raw[0]:>10.5f}{raw[1]:>10.5f}{raw[2]:>9.5f}")
        sk_best = np.inf
        sk_times = {}
        for m in sk_methods:
            model, t = timed(CalibratedClassifierCV(frozen, method=m).fit, X_cal, y_cal)
            r = evaluate(y_te, model.predict_proba(X_te)[:, 1])
            sk_best = min(sk_best, r[0])
            sk_times[m] = t
            print(f"  {'sklearn':<10}{m:<13}{r[0]:>10.5f}{r[1]:>10.5f}{r[2]:>9.5f}{t:>9.3f}")
        auto_loss = None
        for m in ours:
            model, t = timed(CalibrationWrapper(frozen, method=m, random_state=0).fit, X_cal, y_cal)
            r = evaluate(y_te, model.predict_proba(X_te)[:, 1])
            label = f"auto={model.method_}" if m == "auto" else m
            print(f"  {'probwrap':<10}{label:<13}{r[0]:>10.5f}{r[1]:>10.5f}{r[2]:>9.5f}{t:>9.3f}")
            if m == "auto":
                auto_loss = r[0]
            if m == "isotonic":
                print(f"  {'':<23}isotonic fit-time ratio probwrap / sklearn: {t / sk_times['isotonic']:.2f}")
        ratio = auto_loss / sk_best
        n_sets += 1
        wins += ratio <= 1.0 + 1e-9
        print(f"  log-loss ratio probwrap auto / sklearn best: {ratio:.4f} ({'target met' if ratio <= 1 + 1e-9 else 'worse'})")
    print(f"\nauto at least as good as scikit-learn's best method on {wins} of {n_sets} data sets")

    n = 10**5 if quick else 10**6
    rng = np.random.default_rng(0)
    p = rng.uniform(size=n)
    yy = (rng.uniform(size=n) < p).astype(int)
    s = proba_to_log_odds(p)
    t_sort = min(timed(np.argsort, s)[1] for _ in range(5))
    t_fit = min(timed(IsotonicMap().fit, s, yy)[1] for _ in range(5))
    print(f"\nIsotonicMap fit at {n:,} rows: {t_fit:.3f} s; one np.argsort: {t_sort:.3f} s; "
          f"ratio {t_fit / t_sort:.2f} (target <= 2)")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
