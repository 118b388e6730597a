"""The prevalence alarm (two-sided CUSUM) on real data: what it standardises, and its run lengths.

Data: scikit-learn's bundled digits ("is an 8", about 10 %) and breast_cancer. Model: logistic
regression on standardised features inside ``PriorShiftWrapper`` (defaults: EM with
``prior_strength=20``, score interval). Two charts are compared on the same batch tables:

* **old**: ``(prior - source) / se`` with ``se = (upper - lower) / (2 * 1.96)`` (the recipe
  docs/prevalence_alarms.md gave before): the estimate shrunk toward the source prevalence over
  the standard error of the unshrunk one.
* **new**: :func:`probwrap.shift.signed_shift_scores`, the signed root of each batch's
  two-sample shift statistic.

Part A (small batches). 600 labelled rows; 60 batches of 5/10/20/50 rows, the share of 8s at
0.10 for 20 batches then 0.30. Reported: the standard deviation of the standardised values over
the first 20 (in-control) batches, pooled over runs (should be about 1), and the delay from the
change to the first upward alarm (k = 0.5, h = 5), over 10 runs.

Part B (no shift; the labelled rows' shared error). The labelled rows and every batch are iid
draws from one data set (breast_cancer: 150 labelled rows, batches of 200; digits: 300, batches
of 300); 50 batches a run. Reported: the share of runs with an alarm within 50 batches (old
chart, new chart with h = 5, new chart with the h that keeps the in-control run length at least
465 with probability 0.9 over the labelled rows, :func:`decision_interval_for_run_length`), and
what the chart's model says for each: iid N(0, 1) values (the old claim), and values sharing a
baseline error, z ~ N(delta, 1 - rho), delta ~ N(0, rho), rho = n_b / (n_b + n_s), simulated.
Monte Carlo standard error of a share p over R runs: sqrt(p (1 - p) / R).

Run: ``nice -n 10 python benchmarks/prevalence_alarm.py [--quick]``.
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import (
    cusum_alarms,
    decision_interval_for_run_length,
    labelled_share_of_variance,
    signed_shift_scores,
)


def _model() -> object:
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


def _old_z(tab: np.ndarray, src: float) -> np.ndarray:
    se = (tab["upper"][:, 1] - tab["lower"][:, 1]) / (2 * 1.959964)
    return (tab["prior"][:, 1] - src) / np.maximum(se, 1e-12)


def small_batches(runs: int) -> None:
    d = load_digits()
    X, y = d.data, (d.target == 8).astype(int)
    rng = np.random.default_rng(0)
    print("A. digits 'is an 8', 600 labelled rows; share 0.10 -> 0.30 after batch 20 "
          f"({runs} runs)")
    print("   rows/batch | in-control sd old  new | delay old (detected)  new (detected)")
    for bs in (5, 10, 20, 50):
        ic = {"old": [], "new": []}
        delay = {"old": [], "new": []}
        for f in range(runs):
            idx = rng.permutation(len(y))
            lab, pool = idx[:600], idx[600:]
            m = PriorShiftWrapper(_model(), random_state=f).fit(X[lab], y[lab])
            pos, neg = pool[y[pool] == 1], pool[y[pool] == 0]
            rows = []
            for b in range(60):
                npos = rng.binomial(bs, 0.10 if b < 20 else 0.30)
                rows += list(rng.choice(pos, npos)) + list(rng.choice(neg, bs - npos))
            tab = m.monitor(X[np.array(rows)], batch_size=bs)
            src = float(m.source_prior_[1])
            for name, z in (("old", _old_z(tab, src)), ("new", signed_shift_scores(tab, src))):
                ic[name].append(z[:20])
                ch = cusum_alarms(z, 0.0, 1.0)
                up = ch.alarms[(ch.alarms >= 20) & (ch.direction == 1)]
                delay[name].append(int(up[0]) - 19 if up.size else np.inf)

        def fmt(v: list) -> str:
            v = np.asarray(v, dtype=float)
            ok = np.isfinite(v)
            med = f"{np.median(v[ok]):.0f}" if ok.any() else "-"
            return f"median {med:>3} ({ok.sum()}/{v.size})"

        print(f"   {bs:10d} | {np.std(np.concatenate(ic['old'])):17.2f} "
              f"{np.std(np.concatenate(ic['new'])):4.2f} | {fmt(delay['old'])}  "
              f"{fmt(delay['new'])}")


def _model_share(rho: float, h: float, n_batches: int, reps: int, rng) -> float:
    delta = rng.normal(0.0, np.sqrt(rho), size=reps)
    hits = 0
    for dl in delta:
        z = rng.normal(dl, np.sqrt(1.0 - rho), size=n_batches)
        hits += cusum_alarms(z, 0.0, 1.0, decision_interval=h).alarms.size > 0
    return hits / reps


def no_shift(runs: int, n_batches: int = 50) -> None:
    d = load_digits()
    sim = np.random.default_rng(1)  # the model's simulations
    iid = _model_share(0.0, 5.0, n_batches, 4000, sim)
    print(f"\nB. no shift: runs with an alarm within {n_batches} batches ({runs} runs; "
          f"iid N(0, 1) model with h = 5: {iid:.3f})")
    for name, (X, y), n_lab, bs in [
        ("breast_cancer", load_breast_cancer(return_X_y=True), 150, 200),
        ("digits 8", (d.data, (d.target == 8).astype(int)), 300, 300),
    ]:
        rng = np.random.default_rng(0)  # per data set, as in the no-shift repro of the finding
        rho = float(labelled_share_of_variance(bs, n_lab))
        h_assured = decision_interval_for_run_length(465.0, labelled_share=rho)
        counts = {"old": 0, "new h=5": 0, "new assured h": 0}
        mean_z = []
        for run in range(runs):
            lab = rng.choice(len(y), n_lab, replace=True)
            m = PriorShiftWrapper(_model(), random_state=run).fit(X[lab], y[lab])
            tab = m.monitor(X[rng.choice(len(y), bs * n_batches)], batch_size=bs)
            src = float(m.source_prior_[1])
            z = signed_shift_scores(tab, src)
            mean_z.append(z.mean())
            counts["old"] += cusum_alarms(_old_z(tab, src), 0.0, 1.0).alarms.size > 0
            counts["new h=5"] += cusum_alarms(z, 0.0, 1.0).alarms.size > 0
            counts["new assured h"] += cusum_alarms(
                z, 0.0, 1.0, decision_interval=h_assured).alarms.size > 0
        model5 = _model_share(rho, 5.0, n_batches, 4000, sim)
        model_h = _model_share(rho, h_assured, n_batches, 4000, sim)
        se = np.sqrt(0.25 / runs)
        print(f"   {name}: {n_lab} labelled, batches of {bs}, rho = {rho:.2f} "
              f"(sd over runs of a run's mean z {np.std(mean_z):.2f}; model "
              f"{np.sqrt(rho + (1 - rho) / n_batches):.2f})")
        print(f"     old chart h=5            {counts['old'] / runs:.2f}  (it claimed {iid:.3f})")
        print(f"     new chart h=5            {counts['new h=5'] / runs:.2f}  (model with "
              f"baseline error {model5:.3f})")
        print(f"     new chart h={h_assured:<6.1f}      {counts['new assured h'] / runs:.2f}  "
              f"(model with baseline error {model_h:.3f}); MC se <= {se:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    warnings.simplefilter("ignore")
    small_batches(4 if args.quick else 10)
    no_shift(10 if args.quick else 40)


if __name__ == "__main__":
    main()
