"""Prevalence alarms, session 17: change points on long series, one class of many, the note.

Three parts (``--only``), each printing the numbers docs/prevalence_alarms.md quotes:

* ``change-points``: :func:`probwrap.shift.change_point_posterior` on 6,000 batches (noise
  0.005; a new level every 50 batches, and no change at all): peak memory (``tracemalloc``) and
  time of the exact recursion storing every run length (``prune_below=0,
  stored_run_lengths=n``: what the function kept before) and of the defaults, and whether the
  alarms, change batches and most likely starts agree.
* ``classes``: the per-class signed roots (:func:`probwrap.shift.class_shift_scores`) on
  scikit-learn's digits: logistic regression on 30 % of the rows, 600 labelled rows, batches
  resampled from the rest; in-control spread per class, and the CUSUM (k = 0.5, h = 5) on
  digit 3 after its share triples in the odds (0.10 -> 0.25).
* ``note``: the report's small-batch note in the demo scenario (invented parcels; a demo, not a
  check value): ``PriorShiftWrapper`` as in ``probwrap demo`` on 4,000 summer parcels, batches
  of 400; the note from the demo's own winter batches (before) and from a batch at the baseline
  (now), against the chart run on batches resampled at 1.5 times the summer share.

Run: ``nice -n 10 python benchmarks/prevalence_alarm_extras.py [--only PART] [--quick]``.
"""

from __future__ import annotations

import argparse
import copy
import time
import tracemalloc
import warnings

import numpy as np
from scipy.stats import norm


def change_points(quick: bool) -> None:
    from probwrap.shift import change_point_posterior

    n = 2000 if quick else 6000
    rng = np.random.default_rng(0)
    level = np.repeat(rng.normal(0.04, 0.01, n // 50 + 1), 50)[:n]
    series = {"new level every 50": level + rng.normal(0, 0.005, n),
              "no change": rng.normal(0.04, 0.005, n)}
    for name, x in series.items():
        out = {}
        for label, kw in (("exact, all stored", {"prune_below": 0, "stored_run_lengths": n}),
                          ("defaults", {})):
            t0 = time.perf_counter()
            res = change_point_posterior(x, 0.005, **kw)
            seconds = time.perf_counter() - t0
            tracemalloc.start()
            change_point_posterior(x, 0.005, **kw)
            peak = tracemalloc.get_traced_memory()[1] / 1e6
            tracemalloc.stop()
            out[label] = res
            print(f"{name:>20} | {label:>17}: {peak:7.1f} MB peak, {seconds:5.2f} s, "
                  f"{res.alarms.size} alarms, run lengths carried median "
                  f"{np.median(res.kept_run_lengths):.0f} max {res.kept_run_lengths.max()}")
        a, b = out["exact, all stored"], out["defaults"]
        print(f"{'':>20}   same alarms {np.array_equal(a.alarms, b.alarms)}, change batches "
              f"{np.array_equal(a.change_at, b.change_at)}, starts "
              f"{np.array_equal(a.most_likely_start, b.most_likely_start)}; recent_change "
              f"within {np.abs(a.recent_change - b.recent_change).max():.1e}")


def classes(quick: bool) -> None:
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap.shift import PriorEstimator, class_shift_scores, cusum_alarms

    X, y = load_digits(return_X_y=True)
    reps = 4 if quick else 10
    for size in (5, 20):
        z_in, found, delays = [], 0, []
        for rep in range(reps):
            tr, rest = train_test_split(np.arange(len(y)), train_size=0.3, stratify=y,
                                        random_state=rep)
            model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
            P = model.fit(X[tr], y[tr]).predict_proba(X[rest])
            yr = y[rest]
            rng = np.random.default_rng(100 + rep)
            lab = rng.choice(len(yr), 600, replace=False)
            pool = np.setdiff1d(np.arange(len(yr)), lab)
            est = PriorEstimator(n_resamples=0).fit(P[lab], yr[lab])
            odds = np.where(yr[pool] == 3, 3.0, 1.0)
            before = [class_shift_scores(est, P[rng.choice(pool, size)]) for _ in range(20)]
            after = [class_shift_scores(est, P[rng.choice(pool, size, p=odds / odds.sum())])
                     for _ in range(40)]
            z_in.extend(before)
            chart = cusum_alarms(np.array(before + after)[:, 3], 0.0, 1.0)
            up = chart.alarms[(chart.alarms >= 20) & (chart.direction > 0)]
            if up.size:
                found += 1
                delays.append(int(up[0]) - 19)
        z = np.array(z_in)
        print(f"batches of {size:>2}: in-control sd per class {z.std(axis=0).round(2)}, beyond "
              f"1.96 {np.mean(np.abs(z) > 1.96):.3f}; digit 3 x3 odds detected {found}/{reps}, "
              f"median delay {np.median(delays) if delays else float('nan'):.0f}")


def note(quick: bool) -> None:
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import CalibrationWrapper, PriorShiftWrapper
    from probwrap.datasets import make_parcels
    from probwrap.report._alarm_chart import baseline_batch_standard_error
    from probwrap.shift import cusum_alarms, cusum_run_length

    sets, runs = (3, 5) if quick else (15, 10)
    pool = make_parcels(200_000, random_state=999)
    pos, neg = np.flatnonzero(pool.target == 1), np.flatnonzero(pool.target == 0)
    old, new, delays = [], [], []
    for s in range(sets):
        summer = make_parcels(4000, random_state=s)
        base = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
        shift = PriorShiftWrapper(CalibrationWrapper(base, method="platt", cv=3, random_state=s),
                                  cv=3, n_resamples=100, random_state=s)
        shift.fit(summer.data, summer.target)
        src = float(shift.source_prior_[1])
        move = 0.5 * min(src, 1 - src)
        winter = make_parcels(2000, season="winter", random_state=s + 2)
        table = shift.monitor(winter.data, batch_size=400)
        se_w = float(np.median((table["upper"][:, 1] - table["lower"][:, 1])
                               / (2 * norm.ppf(0.975))))
        se_0 = baseline_batch_standard_error(shift.prior_estimator_, 400.0)
        old.append(cusum_run_length(move / se_w, two_sided=True))
        new.append(cusum_run_length(move / se_0, two_sided=True))
        point = copy.copy(shift.prior_estimator_)
        point.n_resamples = 0
        P = shift._inner_output(pool.data, "predict_proba")
        rng = np.random.default_rng(1000 + s)
        for _ in range(runs):
            z = []
            for _ in range(200):
                k = rng.binomial(400, 1.5 * src)
                res = point.estimate(P[np.r_[rng.choice(pos, k), rng.choice(neg, 400 - k)]])
                z.append(np.sign(res.prior[1] - src) * np.sqrt(max(res.shift_statistic, 0.0)))
                if cusum_alarms(np.array(z), 0.0, 1.0).alarms.size:
                    break
            delays.append(len(z))
        print(f"labelled set {s:>2}: source share {src:.4f}; note before {old[-1]:5.1f}, now "
              f"{new[-1]:5.1f} batches (se {se_w:.4f} -> {se_0:.4f})")
    d = np.array(delays, dtype=float)
    print(f"note before: {min(old):.0f}-{max(old):.0f}, median {np.median(old):.1f}, above 20 in "
          f"{sum(v > 20 for v in old)} of {sets}; now: {min(new):.0f}-{max(new):.0f}, median "
          f"{np.median(new):.1f}, above 20 in {sum(v > 20 for v in new)} of {sets}; chart: mean "
          f"delay {d.mean():.1f} (MC se {d.std() / np.sqrt(d.size):.1f}), median {np.median(d):.0f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", choices=("change-points", "classes", "note"))
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    warnings.simplefilter("ignore")
    for name, part in (("change-points", change_points), ("classes", classes), ("note", note)):
        if args.only in (None, name):
            print(f"== {name}")
            part(args.quick)


if __name__ == "__main__":
    main()
