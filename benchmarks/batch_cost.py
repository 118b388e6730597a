"""Coverage of the expected-cost intervals of ``expected_cost_by_batch`` (issue 12, part 3).

For each scenario, draw batches of rows whose true class probabilities are known, compute the
interval of the cost per row *before* the labels (from the probabilities only), then draw the
labels from those probabilities and compute the realised cost per row of the same rule. The share
of batches whose interval covers the realised cost should be the nominal level, within Monte Carlo
error (standard error ``sqrt(c (1 - c) / reps)``).

Scenarios (costs fp = 2, fn = 35; rule: the plug-in cutoff 2 / 37 on the true probability):

* ``gaussian``: x | y ~ N(+-1, 1), prevalence 0.3; the true posterior is logistic in x.
* ``breast_cancer``: scikit-learn's bundled breast-cancer data, a logistic model
  (standardised features, C = 0.05) fitted on all rows taken as the truth; batches resample rows.
* ``parcels_rare``: the invented parcel scenario (prevalence about 4 %), a logistic model taken as
  the truth — shows where the normal interval is rough (few costly positives per small batch).

A second table checks the interval *with an estimated prior* (``lower_with_prior`` /
``upper_with_prior``): Gaussian classes learned at prevalence 0.3 (2,000 labelled rows, the true
posterior), batches drawn at prevalence 0.15, each batch's prior estimated by ``prior_by_batch``
(EM with its default 95 % interval) before the labels are drawn from the true batch posteriors.
By Bonferroni's inequality its coverage is at least 0.95 + 0.95 - 1 = 0.90; the plain interval
at the *estimated* prior (``lower`` / ``upper``) ignores the estimate's error and is printed
beside it.

Run: ``nice -n 10 python benchmarks/batch_cost.py [--quick]``.
"""

from __future__ import annotations

import argparse

import numpy as np
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.datasets import make_parcels
from probwrap.decision import binary_cost_matrix
from probwrap.shift import PriorEstimator, expected_cost_by_batch, prior_by_batch

COSTS = {"fp": 2.0, "fn": 35.0}
CUTOFF = 2.0 / 37.0
SIZES = (50, 200, 1000)
LEVELS = (0.90, 0.95)
KINDS = ("normal", "exact")


def _gaussian(rng: np.random.Generator, m: int) -> np.ndarray:
    prev = 0.3
    y = rng.uniform(size=m) < prev
    x = rng.normal(np.where(y, 1.0, -1.0), 1.0)
    return 1.0 / (1.0 + (1 - prev) / prev * np.exp(-2.0 * x))


def _resampler(proba: np.ndarray):
    def draw(rng: np.random.Generator, m: int) -> np.ndarray:
        return proba[rng.integers(0, proba.shape[0], size=m)]
    return draw


def _breast_cancer() -> np.ndarray:
    data = load_breast_cancer()
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=1000))
    return model.fit(data.data, data.target).predict_proba(data.data)[:, 1]


def _parcels() -> np.ndarray:
    d = make_parcels(20000, random_state=0)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
    return model.fit(d.data, d.target).predict_proba(d.data)[:, 1]


def coverage(draw, n: int, reps: int, seed: int) -> dict[tuple[str, float], float]:
    rng = np.random.default_rng(seed)
    post = draw(rng, n * reps)
    batch = np.repeat(np.arange(reps), n)
    c = binary_cost_matrix(COSTS)
    act = (post > CUTOFF).astype(int)
    tables = {(kind, level): expected_cost_by_batch(post, COSTS, batch, cutoff=CUTOFF,
                                                     level=level, interval=kind)
              for kind in KINDS for level in LEVELS}
    # labels drawn only after the intervals exist
    y = (rng.uniform(size=post.shape[0]) < post).astype(int)
    realised = np.bincount(batch, weights=c[y, act]) / n
    return {key: float(np.mean((t["lower"] <= realised) & (realised <= t["upper"])))
            for key, t in tables.items()}


def prior_band_coverage(n: int, reps: int, seed: int) -> tuple[float, float]:
    """Coverage of (plain interval at the estimated prior, interval over the prior band)."""
    rng = np.random.default_rng(seed)
    src, tgt = 0.3, 0.15

    def posterior(x, prev):
        return 1.0 / (1.0 + (1 - prev) / prev * np.exp(-2.0 * x))

    y_s = rng.uniform(size=2000) < src
    p_s = posterior(rng.normal(np.where(y_s, 1.0, -1.0), 1.0), src)
    est = PriorEstimator(calibration=None, random_state=seed).fit(
        np.column_stack([1 - p_s, p_s]), y_s.astype(int))
    y_t = rng.uniform(size=n * reps) < tgt
    x_t = rng.normal(np.where(y_t, 1.0, -1.0), 1.0)
    post_src = posterior(x_t, src)  # what the model outputs (learned at the source prevalence)
    batch = np.repeat(np.arange(reps), n)
    table = prior_by_batch(est, np.column_stack([1 - post_src, post_src]), batch_size=n)
    t = expected_cost_by_batch(
        post_src, COSTS, batch, cutoff=CUTOFF, source_prior=[1 - src, src],
        target_prior=table["prior"], target_interval=(table["lower"], table["upper"]))
    c = binary_cost_matrix(COSTS)
    act = (post_src > CUTOFF).astype(int)
    y = (rng.uniform(size=n * reps) < posterior(x_t, tgt)).astype(int)  # labels drawn last
    realised = np.bincount(batch, weights=c[y, act]) / n
    plain = float(np.mean((t["lower"] <= realised) & (realised <= t["upper"])))
    band = float(np.mean((t["lower_with_prior"] <= realised)
                         & (realised <= t["upper_with_prior"])))
    return plain, band


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="500 batches per cell, not 2000")
    args = parser.parse_args()
    reps = 500 if args.quick else 2000
    scenarios = {
        "gaussian": _gaussian,
        "breast_cancer": _resampler(_breast_cancer()),
        "parcels_rare": _resampler(_parcels()),
    }
    print(f"coverage of the expected-cost interval, {reps} batches per cell "
          f"(Monte Carlo s.e. {np.sqrt(0.9 * 0.1 / reps):.3f} at 90 %, "
          f"{np.sqrt(0.95 * 0.05 / reps):.3f} at 95 %)")
    print("normal: within 3 s.e. of nominal?  exact: at least nominal - 3 s.e. (it is "
          "conservative by construction)")
    print(f"{'scenario':<15}{'batch':>7}{'normal 90':>10}{'normal 95':>10}{'ok':>4}"
          f"{'exact 90':>10}{'exact 95':>10}{'ok':>4}")
    for i, (name, draw) in enumerate(scenarios.items()):
        for j, n in enumerate(SIZES):
            cov = coverage(draw, n, reps, seed=100 * i + j)
            se = {lv: np.sqrt(lv * (1 - lv) / reps) for lv in LEVELS}
            ok_n = all(abs(cov["normal", lv] - lv) <= 3 * se[lv] for lv in LEVELS)
            ok_e = all(cov["exact", lv] >= lv - 3 * se[lv] for lv in LEVELS)
            print(f"{name:<15}{n:>7}{cov['normal', 0.90]:>10.3f}{cov['normal', 0.95]:>10.3f}"
                  f"{'yes' if ok_n else 'no':>4}{cov['exact', 0.90]:>10.3f}"
                  f"{cov['exact', 0.95]:>10.3f}{'yes' if ok_e else 'no':>4}")

    band_reps = 200 if args.quick else 1000
    print()
    print(f"estimated prior (Gaussian classes, learned at 0.30, batches at 0.15), {band_reps} "
          "batches per cell, 95 % levels; the band must cover >= 0.90 (Bonferroni)")
    print(f"{'batch':>7}{'at estimate':>13}{'over band':>11}  ok")
    for j, n in enumerate((200, 1000)):
        plain, band = prior_band_coverage(n, band_reps, seed=900 + j)
        ok = band >= 0.90 - 3 * np.sqrt(0.9 * 0.1 / band_reps)
        print(f"{n:>7}{plain:>13.3f}{band:>11.3f}  {'yes' if ok else 'no'}")


if __name__ == "__main__":
    main()
