"""Prior-shift estimation: error of EM, BBSE, ACC and PACC, and the log loss it buys back.

Well-specified data: two Gaussian classes in two dimensions with a shared covariance, so a
logistic regression is the correct model of the posterior. The model is trained on 50 000
source rows at 10 % prevalence and its prior-shift summary is fitted on 50 000 further
labelled source rows (a frozen model, so they are held-out); the interval section uses the
first 5 000 of them, so that its bootstrap (which also redraws the held-out rows) stays quick. Unlabelled target rows are drawn at
prevalences from 1 % to 50 % and sizes from 10^2 to 10^5.

Printed per (prevalence, size): the mean absolute error of each estimator's positive-class
prior over repetitions, and the log loss (scikit-learn's ``log_loss``) of the EM-adapted
probabilities, of the unadapted ones and of the oracle that adjusts to the true prior; "gap
closed" is (unadapted - adapted) / (unadapted - oracle). Targets at 10^4 unlabelled rows: prior
error <= 0.01 and at least 90 % of the gap closed. At 10^2 rows the estimate is noisy enough
that adapting can cost log loss (a negative "gap closed"): wait for more rows, or check the
interval first. Then the coverage of EM's 95 % bootstrap interval on repeated draws.

Run: ``python benchmarks/shift.py`` (a few minutes on two cores; ``--quick`` for a smaller run).
"""

from __future__ import annotations

import sys
import time
import warnings

import numpy as np
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss

from probwrap import PriorShiftWrapper
from probwrap.shift import adjust_to_prior

MEAN1 = np.array([1.6, 0.8])
SOURCE_PREVALENCE = 0.10
METHODS = ("em", "bbse", "acc", "pacc")


def draw(n: int, prevalence: float, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    y = (rng.uniform(size=n) < prevalence).astype(int)
    X = rng.normal(size=(n, 2)) + y[:, None] * MEAN1
    return X, y


def main(quick: bool = False) -> None:
    rng = np.random.default_rng(0)
    X_tr, y_tr = draw(50_000, SOURCE_PREVALENCE, rng)
    X_ho, y_ho = draw(50_000, SOURCE_PREVALENCE, rng)
    model = FrozenEstimator(LogisticRegression().fit(X_tr, y_tr))
    wrappers = {
        m: PriorShiftWrapper(model, method=m, n_resamples=0).fit(X_ho, y_ho) for m in METHODS
    }
    prevalences = (0.01, 0.05, 0.2, 0.5) if quick else (0.01, 0.02, 0.05, 0.1, 0.2, 0.35, 0.5)
    sizes = (100, 1000, 10_000) if quick else (100, 1000, 10_000, 100_000)
    reps = 3 if quick else 5

    head = (
        f"{'prev':>5} {'rows':>7} | " + " ".join(f"{'err ' + m:>9}" for m in METHODS)
        + f" | {'LL none':>8} {'LL EM':>8} {'LL oracle':>9} {'gap closed':>10} | {'target':>6}"
    )
    print(f"source prevalence {SOURCE_PREVALENCE:.0%}; mean over {reps} draws per row")
    print(head)
    print("-" * len(head))
    t0 = time.perf_counter()
    for prev in prevalences:
        for n in sizes:
            errs = {m: [] for m in METHODS}
            ll = {"none": [], "em": [], "oracle": []}
            for _ in range(reps):
                X, y = draw(n, prev, rng)
                if y.min() == y.max():  # log loss needs both classes among the scored rows
                    y = y.copy()
                    y[0] = 1 - y[0]
                true = np.array([1 - y.mean(), y.mean()])
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    for m, w in wrappers.items():
                        errs[m].append(abs(w.adapt(X).target_prior_[1] - true[1]))
                em = wrappers["em"]
                raw = em.estimator_.predict_proba(X)
                ll["none"].append(log_loss(y, raw, labels=[0, 1]))
                ll["em"].append(log_loss(y, em.predict_proba(X), labels=[0, 1]))
                oracle = adjust_to_prior(em.calibrator_.predict(raw), em.source_prior_, true)
                ll["oracle"].append(log_loss(y, oracle, labels=[0, 1]))
            mean = {k: float(np.mean(v)) for k, v in ll.items()}
            gap = mean["none"] - mean["oracle"]
            closed = (mean["none"] - mean["em"]) / gap if gap > 1e-4 else np.nan
            closed_txt = f"{closed:10.1%}" if np.isfinite(closed) else f"{'(no gap)':>10}"
            verdict = ""
            if n == 10_000:
                ok = np.mean(errs["em"]) <= 0.01 and (not np.isfinite(closed) or closed >= 0.9)
                verdict = "met" if ok else "MISSED"
            print(
                f"{prev:5.0%} {n:7d} | "
                + " ".join(f"{np.mean(errs[m]):9.4f}" for m in METHODS)
                + f" | {mean['none']:8.4f} {mean['em']:8.4f} {mean['oracle']:9.4f} {closed_txt}"
                + f" | {verdict:>6}"
            )
    print(f"({time.perf_counter() - t0:.1f} s)")

    # -- coverage of the bootstrap interval --------------------------------------------------
    n_cov, reps_cov = (1000, 10) if quick else (1000, 30)
    print(f"\nEM 95 % bootstrap interval, {n_cov} unlabelled rows, {reps_cov} draws per prevalence")
    print(f"{'prev':>5} {'coverage':>9} {'mean width':>11}")
    em_int = PriorShiftWrapper(model, n_resamples=100, random_state=0)
    em_int.fit(X_ho[:5000], y_ho[:5000])
    for prev in (0.05, 0.2, 0.5):
        hits, widths = [], []
        for _ in range(reps_cov):
            X, y = draw(n_cov, prev, rng)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                lo, hi = em_int.adapt(X).target_prior_interval_[1]
            hits.append(lo <= prev <= hi)  # the population prevalence the rows were drawn at
            widths.append(hi - lo)
        print(f"{prev:5.0%} {np.mean(hits):9.1%} {np.mean(widths):11.4f}")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
