"""cutoff_interval's exact range below 100 rows: cutoffs no exact binomial test sets apart.

References (outside the project): scikit-learn's bundled breast cancer data (Wolberg, Street &
Mangasarian 1995, UCI), a held-out half scored by scikit-learn's LogisticRegression on five
features, drawn 12-60 rows at a time; every pair of cutoffs is tested by brute force with
SciPy's ``scipy.stats.binomtest`` (one-sided, at the share fp / (fp + fn) where the two cutoffs
cost the same), and a cutoff's cost is taken from scikit-learn's ``confusion_matrix``.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import binomtest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix
from sklearn.model_selection import train_test_split

from probwrap.decision import CutoffIntervalCoverageWarning, cutoff_interval


@pytest.fixture(scope="module")
def scored():
    """Held-out half of breast cancer (malignant = 1) scored on five features."""
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    Xa, Xb, ya, yb = train_test_split(X[:, :5], y, test_size=0.5, random_state=0, stratify=y)
    p = LogisticRegression(max_iter=5000).fit(Xa, ya).predict_proba(Xb)[:, 1]
    # rounded: some rows share a score (ties between decisions); kept off 0 and 1, where the
    # cutoff acting on every row lies beyond the bound
    return np.clip(np.round(p, 2), 0.01, 0.99), yb


def _draw(p, y, n, seed):
    rng = np.random.default_rng(seed)
    while True:
        idx = rng.choice(p.shape[0], n, replace=False)
        if 0 < y[idx].sum() < n:
            return p[idx], y[idx]


def _brute_exact(p, y, fp, fn, level):
    """The exact range rebuilt pair by pair with binomtest and the tied range with sklearn."""
    u = np.unique(p)
    # decision j: positive action for rows scoring above ``lower[j]`` (any cutoff in
    # [lower[j], upper[j]] gives it), with score bounds (0, 1)
    lower = np.concatenate([[0.0], u])
    upper = np.concatenate([u, [1.0]])
    cuts = [p > lo for lo in lower]
    costs = []
    for act in cuts:
        tn, fp_n, fn_n, tp = confusion_matrix(y, act.astype(int), labels=[0, 1]).ravel()
        costs.append(fp * fp_n + fn * fn_n)
    costs = np.array(costs)
    tied = np.flatnonzero(np.isclose(costs, costs.min()))
    even = fp / (fp + fn)
    kept = []
    for j, act_j in enumerate(cuts):
        dropped = False
        for act_k in cuts:
            between = act_j != act_k
            r, c = int(between.sum()), int(y[between].sum())
            if r == 0:
                continue
            # j acts on every row between or on none of them; acting, it is no worse while their
            # positive share is at least `even` (not acting: at most)
            side = "less" if act_j[between].all() else "greater"
            if binomtest(c, r, even, alternative=side).pvalue < 1.0 - level:
                dropped = True
                break
        if not dropped:
            kept.append(j)
    kept = np.array(kept, dtype=int)
    return (min(lower[kept].min(), lower[tied].min()), max(upper[kept].max(), upper[tied].max()),
            costs)


@pytest.mark.parametrize(("n", "seed", "fn", "level"),
                         [(12, 0, 4.0, 0.95), (30, 1, 4.0, 0.95), (30, 2, 1.0, 0.9),
                          (60, 3, 4.0, 0.95), (60, 4, 2.5, 0.8)])
def test_exact_range_matches_pairwise_binomial_tests(scored, n, seed, fn, level):
    p, y = _draw(*scored, n, seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CutoffIntervalCoverageWarning)
        ci = cutoff_interval(p, y, {"fp": 1.0, "fn": fn}, score_bounds=(0, 1), n_resamples=50,
                             confidence_level=level, random_state=0)
    lo, hi, costs = _brute_exact(p, y, 1.0, fn, level)
    assert ci.exact_low == pytest.approx(lo, abs=1e-12)
    assert ci.exact_high == pytest.approx(hi, abs=1e-12)
    # never narrower than the rows' own tied range
    assert ci.exact_low <= ci.tie_low and ci.exact_high >= ci.tie_high


def test_exact_range_drops_a_cutoff_the_rows_show_dearer(scored):
    # on 60 rows acting on everyone (cutoff 0) costs many false alarms: some test drops it
    p, y = _draw(*scored, 60, 3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CutoffIntervalCoverageWarning)
        ci = cutoff_interval(p, y, {"fp": 1.0, "fn": 4.0}, score_bounds=(0, 1),
                             n_resamples=50, random_state=0)
    assert 0.0 < ci.exact_low < ci.exact_high < 1.0


def test_warning_quotes_the_exact_range(scored):
    p, y = _draw(*scored, 30, 1)
    with pytest.warns(CutoffIntervalCoverageWarning, match="exact binomial test"):
        ci = cutoff_interval(p, y, {"fp": 1.0, "fn": 4.0}, score_bounds=(0, 1),
                             n_resamples=50, random_state=0)
    assert np.isfinite(ci.exact_low)


def test_equal_weights_any_scale_give_the_same_range(scored):
    p, y = _draw(*scored, 30, 1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CutoffIntervalCoverageWarning)
        plain = cutoff_interval(p, y, {"fp": 1.0, "fn": 4.0}, score_bounds=(0, 1),
                                n_resamples=50, random_state=0)
        for c in (2.0, 3.0, 0.1):
            scaled = cutoff_interval(p, y, {"fp": 1.0, "fn": 4.0}, score_bounds=(0, 1),
                                     sample_weight=np.full(y.shape[0], c), n_resamples=50,
                                     random_state=0)
            assert (scaled.exact_low, scaled.exact_high) == (plain.exact_low, plain.exact_high)


def test_no_exact_range_where_rows_are_not_counts_or_enough(scored):
    # (unequal weights have one since 4 December 2026: tests/test_cutoff_exact_weighted.py)
    p, y = _draw(*scored, 30, 1)
    costs = {"fp": 1.0, "fn": 4.0}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CutoffIntervalCoverageWarning)
        cases = [
            cutoff_interval(p, y, costs, capacity=0.3, n_resamples=20, random_state=0),
            cutoff_interval(p, y, costs, groups=np.arange(y.shape[0]) // 2, n_resamples=20,
                            random_state=0),
        ]
    p_all, y_all = scored
    cases.append(cutoff_interval(p_all, y_all, costs, n_resamples=20, random_state=0))
    for ci in cases:
        assert np.isnan(ci.exact_low) and np.isnan(ci.exact_high)
