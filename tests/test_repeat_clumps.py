"""The chance spread of the count of tied rows where a few values hold many rows.

Extending RepeatedRowsWarning to ``probwrap prevalence`` (scores in files) showed false alarms:
scores rounded to 2 or 3 decimals (breast-cancer logistic regression scores pile up at 0.00
and 1.00) drawn *without* replacement warned on 9 and 14 of 250 batches, because the rule
measured the excess of tied pairs in Poisson standard deviations of their expected count, and
where a few values hold many rows the count of ties swings with how many rows land on them.
The rule now adds the U-statistic variance term of pairs sharing a row, ``n (n - 1) (n - 2)
(sum f^3 - (sum f^2)^2)``, with both sums read off the labelled rows
(:func:`probwrap.shift._repeats.labelled_clumps`).

References: the variance of the count of tied pairs against a Monte Carlo of multinomial draws
(NumPy), and ``labelled_clumps`` against a brute-force sum over groups. Data: scikit-learn's
bundled breast cancer set, 5-fold cross-validated logistic regression scores.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli._prevalence_numbers import reference_estimator, two_columns
from probwrap.shift._repeats import (
    labelled_clumps,
    labelled_repeat_counts,
    repeats_of_rows,
)


def test_variance_of_tied_pairs_against_simulation():
    # a clumpy distribution: two values hold 60 % of the draws, 200 more share the rest
    f = np.r_[0.35, 0.25, np.full(200, 0.4 / 200)]
    q, s = float(np.sum(f**2)), float(np.sum(f**3))
    n = 60
    rng = np.random.default_rng(0)
    counts = rng.multinomial(n, f, size=20000)
    ties = np.sum(counts * (counts - 1) / 2, axis=1)
    var = n * (n - 1) / 2 * (q - q * q) + n * (n - 1) * (n - 2) * (s - q * q)
    assert ties.mean() == pytest.approx(n * (n - 1) / 2 * q, rel=0.01)
    assert ties.var() == pytest.approx(var, rel=0.05)
    # the Poisson count alone (the rule before) is far too small here
    assert n * (n - 1) / 2 * q < 0.1 * var


def test_labelled_clumps_against_brute_force():
    rng = np.random.default_rng(1)
    p1 = rng.choice([0.1, 0.2, 0.5, 0.9], size=80, p=[0.4, 0.3, 0.2, 0.1])
    y = (rng.uniform(size=80) < p1).astype(int)
    Q, S = labelled_clumps(np.column_stack([1 - p1, p1]), y, 2)
    share = {c: {v: np.mean(p1[y == c] == v) for v in np.unique(p1)} for c in (0, 1)}
    for a in (0, 1):
        for b in (0, 1):
            assert Q[a, b] == pytest.approx(sum(share[a][v] * share[b][v] for v in share[a]))
            for c in (0, 1):
                assert S[a, b, c] == pytest.approx(
                    sum(share[a][v] * share[b][v] * share[c][v] for v in share[a]))


@pytest.fixture(scope="module")
def rounded_scores():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
    p = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
    return np.round(p, 2), y


@pytest.mark.parametrize("seed, size, start", [(0, 20, 140), (0, 60, 120), (4, 60, 120),
                                               (6, 20, 60)])
def test_rounded_scores_drawn_without_replacement_do_not_warn(rounded_scores, seed, size,
                                                              start):
    q, y = rounded_scores
    order = np.random.default_rng(seed).permutation(y.shape[0])
    ref, batch = order[:200], order[200:][start:start + size]
    est = reference_estimator(q[ref], y[ref], n_resamples=20, seed=0)
    ties = labelled_repeat_counts(two_columns(q[ref]), y[ref], 2)
    clumps = labelled_clumps(two_columns(q[ref]), y[ref], 2)
    # the rule before (Poisson count only) took these for resampled rows
    assert repeats_of_rows(est, ties, two_columns(q[batch])) is not None
    assert repeats_of_rows(est, (*ties, *clumps), two_columns(q[batch])) is None
    # (resampling is not told from chance here at all: two rounded scores of the mix coincide
    # with probability about 0.2, so a batch drawn with replacement from 10 rows repeats no
    # more than chance allows; the batches where resampling shows are tested in
    # tests/test_prior_shift_repeated_rows.py and tests/test_repeated_rows_everywhere.py)
