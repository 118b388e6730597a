"""The shrunk prior estimate against the truth on bundled real sets, under strong shifts.

``nice python benchmarks/prior_strong_evidence.py`` (about a minute). Five binary sets bundled
with scikit-learn (breast cancer, digits "is 8") and statsmodels (fair: any affair; spector;
anes96: vote), logistic regression's 5-fold cross-validated probabilities; per cell 10 draws of
up to 300 labelled rows and up to 200 unlabelled rows (spector: 16 and 16) with the unlabelled
rows' prevalence left as it is ("none") or set to 0, 0.05, 0.95 or 1 (as far as the pool
allows). Per cell: mean and largest |estimate - truth| of ``PriorEstimator().estimate``'s
``prior``, how often it lies outside ``ml_interval`` (the interval of the shares), how often the
reported interval and ``ml_interval`` hold the truth, and the mean distance between the shrunk
and the maximum-likelihood estimate (docs/prior_shift.md, "Doing no harm", item 1).

``--no-interval``: the same draws with ``PriorEstimator(n_resamples=0)``, which computes no
interval (the fade is then decided by the likelihood-ratio region of the shares, since
4 December 2026); per cell the mean and largest |estimate - truth|, the mean pseudo-rows used,
and how often the estimate lies outside the interval of the shares that the default estimator
computes on the same draw.
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
import statsmodels.api as sm
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift import PriorEstimator

TARGETS = ("none", 0.0, 0.05, 0.95, 1.0)
DRAWS = 10


def sets():
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer", X, y
    X, y = load_digits(return_X_y=True)
    yield "digits_is8", X, (y == 8).astype(int)
    d = sm.datasets.fair.load_pandas().data
    yield "fair", d.drop(columns=["affairs"]).to_numpy(float), (d.affairs > 0).to_numpy(int)
    d = sm.datasets.spector.load_pandas().data
    yield "spector", d[["GPA", "TUCE", "PSI"]].to_numpy(float), d.GRADE.to_numpy(int)
    d = sm.datasets.anes96.load_pandas().data
    yield "anes96", d.drop(columns=["vote"]).to_numpy(float), d.vote.to_numpy(int)


def two(v: np.ndarray) -> np.ndarray:
    return np.column_stack([1 - v, v])


def unlabelled_rows(rng, rest, y, target, m):
    if target == "none":
        return rng.choice(rest, m, replace=False)
    pos, neg = rest[y[rest] == 1], rest[y[rest] == 0]
    npos = min(int(round(target * m)), len(pos))
    nneg = min(m - npos, len(neg))
    return np.concatenate([rng.choice(pos, npos, replace=False),
                           rng.choice(neg, nneg, replace=False)])


def main_no_interval() -> None:
    warnings.simplefilter("ignore")
    totals: dict[str, list] = {}
    outside_all = n_all = 0
    for name, X, y in sets():
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
        s = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
        n = len(y)
        n_lab = min(300, n // 2)
        for target in TARGETS:
            errs, used, outside = [], [], 0
            for seed in range(DRAWS):
                rng = np.random.default_rng(seed)
                idx = rng.permutation(n)
                lab, rest = idx[:n_lab], idx[n_lab:]
                m = min(200, len(rest))
                unl = unlabelled_rows(rng, rest, y, target, m)
                truth = y[unl].mean()
                r = PriorEstimator(n_resamples=0).fit(two(s[lab]), y[lab]).estimate(two(s[unl]))
                ref = PriorEstimator(random_state=0).fit(two(s[lab]), y[lab]).estimate(
                    two(s[unl]))
                mlo, mhi = ref.ml_interval[1]
                e = r.prior[1]
                errs.append(abs(e - truth))
                used.append(r.pseudo_rows)
                outside += not (mlo - 1e-12 <= e <= mhi + 1e-12)
            print(f"{name:14s} target {str(target):5s} n_lab {n_lab:4d} n_unl {m:4d} | "
                  f"mean|est-truth| {np.mean(errs):.4f}  max {np.max(errs):.4f} | mean "
                  f"pseudo-rows {np.mean(used):5.2f} | est outside the default's ml_interval "
                  f"{outside:2d}/{DRAWS}", flush=True)
            totals.setdefault("none" if target == "none" else "shift", []).extend(errs)
            outside_all += outside
            n_all += DRAWS
    for key, v in totals.items():
        print(f"ALL {key} (n_resamples=0): mean |est-truth| {np.mean(v):.4f} over {len(v)} draws")
    print(f"ALL (n_resamples=0): estimate outside the default's ml_interval in {outside_all} of "
          f"{n_all} draws")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--no-interval", action="store_true",
                        help="estimates with n_resamples=0 (no interval)")
    if parser.parse_args().no_interval:
        main_no_interval()
        return
    warnings.simplefilter("ignore")
    totals: dict[str, list] = {}
    outside_all = cover_all = n_all = 0
    for name, X, y in sets():
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
        s = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
        n = len(y)
        n_lab = min(300, n // 2)
        for target in TARGETS:
            errs, pull, outside, cover, cover_ml = [], [], 0, 0, 0
            for seed in range(DRAWS):
                rng = np.random.default_rng(seed)
                idx = rng.permutation(n)
                lab, rest = idx[:n_lab], idx[n_lab:]
                m = min(200, len(rest))
                unl = unlabelled_rows(rng, rest, y, target, m)
                truth = y[unl].mean()
                est = PriorEstimator(random_state=0).fit(two(s[lab]), y[lab])
                r = est.estimate(two(s[unl]))
                e = r.prior[1]
                lo, hi = r.interval[1]
                mlo, mhi = r.ml_interval[1]
                errs.append(abs(e - truth))
                outside += not (mlo - 1e-12 <= e <= mhi + 1e-12)
                cover += lo <= truth <= hi
                cover_ml += mlo <= truth <= mhi
                pull.append(abs(e - r.ml_prior[1]))
            print(f"{name:14s} target {str(target):5s} n_lab {n_lab:4d} n_unl {m:4d} | "
                  f"mean|est-truth| {np.mean(errs):.4f}  max {np.max(errs):.4f} | est outside "
                  f"ml_interval {outside:2d}/{DRAWS} | interval covers {cover:2d}/{DRAWS} "
                  f"ml_interval {cover_ml:2d}/{DRAWS} | mean|est-ml| {np.mean(pull):.4f}",
                  flush=True)
            totals.setdefault("none" if target == "none" else "shift", []).extend(errs)
            outside_all += outside
            cover_all += cover
            n_all += DRAWS
    for key, v in totals.items():
        print(f"ALL {key}: mean |est-truth| {np.mean(v):.4f} over {len(v)} draws")
    print(f"ALL: estimate outside ml_interval in {outside_all} of {n_all} draws; "
          f"interval covers the truth in {cover_all} of {n_all}")


if __name__ == "__main__":
    main()
