"""Does PriorShiftWrapper's refit/fold-model check count a row of weight 2 as the row twice?

Each draw takes 150 rows of scikit-learn's breast cancer set, puts 50 of them at weight 2 and
halves every weight (1 and 0.5: not whole counts, so the rows stay the folds' units), and fits
``PriorShiftWrapper(GaussianNB(), cv=3)``. From the fold models' scores the check was given it
prints the wrapper's ``fold_disagreement_``, the same statistic on the rows repeated by their
counts (``np.repeat``, the reference), the rows counted once each (the reading before
5 December 2026 evening) and the choice each implies against the limit.

Run (seconds; ``--quick``: three draws instead of ten)::

    python benchmarks/fold_disagreement_weights.py --quick
"""
from __future__ import annotations

import argparse
import warnings

import numpy as np


def _repeated(scores, counts):
    """The statistic, unweighted, on the rows repeated as many times as their counts."""
    s = np.repeat(np.stack(scores), counts, axis=1)
    mean = s.mean(axis=0)
    return float(np.mean(s.var(axis=0, ddof=1))) / float(np.mean(mean.var(axis=0)))


def draw(seed):
    """One draw: (wrapper's statistic, repeated rows', rows once each, wrapper's choice)."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.naive_bayes import GaussianNB

    import probwrap._prior_shift as module
    from probwrap import PriorShiftWrapper
    from probwrap._calibration_wrapper import fold_disagreement

    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(seed)
    p = rng.permutation(len(y))
    X, y = X[p][:150], y[p][:150]
    counts = np.ones(150, dtype=int)
    counts[rng.choice(150, 50, replace=False)] = 2
    seen = []

    def spy(fold_scores, sample_weight=None):
        seen.append([np.asarray(s, dtype=float) for s in fold_scores])
        return fold_disagreement(fold_scores, sample_weight)

    real = module.fold_disagreement
    module.fold_disagreement = spy
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            m = PriorShiftWrapper(GaussianNB(), cv=3, random_state=0, n_resamples=20).fit(
                X, y, sample_weight=0.5 * counts)
    finally:
        module.fold_disagreement = real
    scores = seen[0]
    return (m.fold_disagreement_, _repeated(scores, counts),
            _repeated(scores, np.ones(150, dtype=int)), m.predicted_with_)


def main(argv=None):
    from probwrap._calibration_wrapper import FOLD_DISAGREEMENT_LIMIT

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="three draws instead of ten")
    args = ap.parse_args(argv)
    print(f"draw  wrapper  repeated  once-each  choice  (limit {FOLD_DISAGREEMENT_LIMIT})")
    worst, flips = 0.0, 0
    for seed in range(3 if args.quick else 10):
        got, ref, once, choice = draw(seed)
        worst = max(worst, abs(got - ref) / ref)
        flips += (once > FOLD_DISAGREEMENT_LIMIT) != (ref > FOLD_DISAGREEMENT_LIMIT)
        print(f"{seed:4d}  {got:.5f}  {ref:.5f}   {once:.5f}  {choice}")
    print(f"largest relative gap wrapper vs repeated rows: {worst:.1e}; "
          f"draws where counting rows once crosses the limit: {flips}")


if __name__ == "__main__":
    main()
