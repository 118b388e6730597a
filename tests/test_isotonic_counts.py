"""IsotonicMap's unweighted fit by counts, against the direct definition and scikit-learn.

Without weights (or with one power-of-two weight for every row) ``IsotonicMap.fit`` orders the
rows with their classes by one plain sort, pools the stretches between rises of the share of
positives before SciPy's PAV pass, and divides each level's count of positives by its count of
rows. Checked here against:

- the direct definition: the isotonic regression of the labels over the tied-score groups by
  pool-adjacent-violators in exact integer arithmetic (Ayer et al. 1955; a block is merged
  while its mean is not above the one before), each level's value ``K / G`` rounded once
  (Python's ``int / int`` is correctly rounded), the kept points the first and last distinct
  score of each level;
- scikit-learn's ``IsotonicRegression`` (reference library) on the same rows, with Platt's
  (1999) smoothed targets for ``smooth_targets=True``;
- scikit-learn's bundled breast cancer data, scored by a logistic regression fitted on the
  other half of the rows;
- the weighted path of the same map (weights of 3 for every row: the same fit, other code).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import expit
from sklearn.datasets import load_breast_cancer
from sklearn.isotonic import IsotonicRegression
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap._packed_sort import packed_order
from probwrap.calibration import IsotonicMap

EPS = np.finfo(float).eps


def _exact_levels(s, y):
    """The direct definition on exactly tied scores (distinct scores far apart): groups of
    equal scores, PAV on (positives, rows) pairs in Python integers, merged while the mean of
    a block is not above the mean of the block before (cross-multiplied: exact)."""
    distinct, inverse = np.unique(s, return_inverse=True)
    rows = np.bincount(inverse).tolist()
    positives = np.bincount(inverse, weights=y).astype(np.int64).tolist()
    blocks: list[list[int]] = []  # [positives, rows, first group, last group]
    for j, (k, g) in enumerate(zip(positives, rows, strict=True)):
        blocks.append([k, g, j, j])
        while len(blocks) > 1 and blocks[-2][0] * blocks[-1][1] >= blocks[-1][0] * blocks[-2][1]:
            k2, g2, _, last = blocks.pop()
            blocks[-1][0] += k2
            blocks[-1][1] += g2
            blocks[-1][3] = last
    return distinct, blocks


def _expected_map(s, y, smooth):
    """Thresholds and values of the fitted map by the direct definition (see module doc)."""
    distinct, blocks = _exact_levels(s, y)
    n_pos, n = int(y.sum()), y.shape[0]
    t_neg, t_pos = 1.0 / (n - n_pos + 2.0), (n_pos + 1.0) / (n_pos + 2.0)  # Platt (1999)
    points, values = [], []
    for k, g, a, b in blocks:
        share = k / g  # one correctly rounded division of exact integers
        value = t_neg + (t_pos - t_neg) * share if smooth else share
        points += [a] if a == b else [a, b]
        values += [value] if a == b else [value, value]
    return distinct[points], np.array(values), blocks


def _draws(rng, count):
    """Unweighted rows: continuous scores, rounded scores (ties within and across classes),
    few distinct scores, separated classes, and scores too far apart in magnitude for the
    packed keys (the per-class merge)."""
    for trial in range(count):
        n = int(rng.integers(2, 900))
        kind = trial % 5
        if kind == 0:
            s = rng.normal(size=n) * 3
        elif kind == 1:
            s = np.round(rng.normal(size=n) * 2, int(rng.integers(0, 3)))
        elif kind == 2:
            s = rng.choice([-2.5, -1.0, 0.0, 0.5, 4.0], n)
        elif kind == 3:
            s = rng.uniform(size=n)
        else:  # 1e-300 beside 1e300: more binary orders of magnitude than the keys hold
            s = rng.choice([-1e300, -2.0, 1e-300, 0.5, 7.0, 1e300], n,
                           p=[0.05, 0.3, 0.2, 0.2, 0.2, 0.05])
        p = expit(np.clip(s, -30, 30))
        y = (rng.random(n) < p).astype(float)
        y[:2] = [0.0, 1.0] if trial % 2 else [1.0, 0.0]
        yield kind, s, y


def test_counts_fit_equals_the_exact_isotonic_regression_rounded_once():
    rng = np.random.default_rng(20261204)
    for kind, s, y in _draws(rng, 250):
        plain = IsotonicMap(smooth_targets=False).fit(s, y)
        xp, fp, _ = _expected_map(s, y, smooth=False)
        # the direct definition: the same points, each value the exact share rounded once
        np.testing.assert_array_equal(plain.thresholds_, xp)
        np.testing.assert_array_equal(plain.values_, fp)
        smooth = IsotonicMap().fit(s, y)
        xs, fs, _ = _expected_map(s, y, smooth=True)
        np.testing.assert_array_equal(smooth.thresholds_, xs)
        # t- + (t+ - t-) * share, evaluated the same way: a few roundings of the exact mean
        np.testing.assert_allclose(smooth.values_, fs, rtol=4 * EPS, atol=0)
        if kind == 4 and (np.abs(s) == 1e300).any():
            # these rows go through the per-class merge (the keys cannot hold the scores)
            assert packed_order(s, y.astype(np.int8)) is None


def test_counts_fit_predicts_as_scikit_learn_isotonic_regression():
    # scikit-learn's IsotonicRegression(out_of_bounds="clip") on the labels, and on Platt's
    # (1999) smoothed targets for the default fit; 1e-12 allows for its running means
    rng = np.random.default_rng(7)
    for kind, s, y in _draws(rng, 60):
        if kind == 4:  # scikit-learn's interpolation overflows across gaps of 1e300
            continue
        grid = np.concatenate([s, np.linspace(s.min() - 1, s.max() + 1, 301)])
        ref = IsotonicRegression(out_of_bounds="clip").fit(s, y)
        np.testing.assert_allclose(
            IsotonicMap(smooth_targets=False).fit(s, y).predict(grid), ref.predict(grid),
            atol=1e-12, rtol=0,
        )
        n_pos, n_neg = y.sum(), (1 - y).sum()
        t = np.where(y == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
        ref_t = IsotonicRegression(out_of_bounds="clip").fit(s, t)
        np.testing.assert_allclose(
            IsotonicMap().fit(s, y).predict(grid), ref_t.predict(grid), atol=1e-12, rtol=0
        )


@pytest.mark.parametrize("rows, decimals", [(200_000, None), (200_000, 3), (100_000, 1)])
def test_large_sets_with_and_without_ties(rows, decimals):
    # random large sets (continuous scores; scores rounded to 3 and 1 decimals: ties across
    # the classes) against the exact definition and scikit-learn's IsotonicRegression
    rng = np.random.default_rng(rows + (decimals or 0))
    s = rng.normal(size=rows) * 2
    if decimals is not None:
        s = np.round(s, decimals)
    y = (rng.random(rows) < expit(s)).astype(float)
    m = IsotonicMap(smooth_targets=False).fit(s, y)
    xp, fp, blocks = _expected_map(s, y, smooth=False)
    np.testing.assert_array_equal(m.thresholds_, xp)
    np.testing.assert_array_equal(m.values_, fp)
    assert len(blocks) > 50  # many levels: the pooling before the pass did real work
    grid = np.linspace(-9, 9, 2001)
    ref = IsotonicRegression(out_of_bounds="clip").fit(s, y)
    np.testing.assert_allclose(m.predict(grid), ref.predict(grid), atol=1e-12, rtol=0)


def test_breast_cancer_held_out_scores():
    # scikit-learn's bundled breast cancer data: a logistic regression fitted on one half,
    # its decision_function on the other half calibrated; reference IsotonicRegression
    X, y = load_breast_cancer(return_X_y=True)
    X_fit, X_cal, y_fit, y_cal = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)).fit(X_fit, y_fit)
    s = model.decision_function(X_cal)
    yf = y_cal.astype(float)
    grid = np.sort(np.concatenate([s, model.decision_function(X_fit)]))
    plain = IsotonicMap(smooth_targets=False).fit(s, y_cal)
    xp, fp, _ = _expected_map(s, yf, smooth=False)
    np.testing.assert_array_equal(plain.thresholds_, xp)
    np.testing.assert_array_equal(plain.values_, fp)
    ref = IsotonicRegression(out_of_bounds="clip").fit(s, yf)
    np.testing.assert_allclose(plain.predict(grid), ref.predict(grid), atol=1e-12, rtol=0)
    n_pos, n_neg = yf.sum(), (1 - yf).sum()
    t = np.where(yf == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    ref_t = IsotonicRegression(out_of_bounds="clip").fit(s, t)
    smooth = IsotonicMap().fit(s, y_cal)
    np.testing.assert_allclose(smooth.predict(grid), ref_t.predict(grid), atol=1e-12, rtol=0)
    assert plain.boundary_ is None and smooth.boundary_ is None  # the classes overlap here


def _separated_direct(s, y):
    """Separation by its definition: a cutoff with every negative on one side and every
    positive on the other (ties at it allowed), at least one row strictly on each side."""
    neg, pos = s[y == 0], s[y == 1]
    return bool((neg.max() <= pos.min() and pos.max() > neg.min())
                or (pos.max() <= neg.min() and neg.max() > pos.min()))


def test_separation_flag_read_off_the_order():
    rng = np.random.default_rng(3)
    cases = [
        (np.array([-1.0, 0.0, 1.0, 2.0]), np.array([0, 0, 1, 1])),  # up
        (np.array([-1.0, 0.0, 1.0, 2.0]), np.array([1, 1, 0, 0])),  # down
        (np.array([0.0, 1.0, 1.0, 2.0]), np.array([0, 0, 1, 1])),  # tie at the cutoff, up
        (np.array([0.0, 1.0, 1.0, 2.0]), np.array([1, 0, 1, 0])),  # tie at the cutoff, down
        (np.array([1.0, 1.0, 1.0]), np.array([0, 1, 0])),  # all tied: not separated
        (np.array([0.0, 1.0, 2.0, 3.0]), np.array([0, 1, 0, 1])),  # mixed
        (np.array([-1e300, 1e-300, 1e300]), np.array([0, 1, 1])),  # per-class merge path
        (np.array([-1e300, 1e-300, 1e300]), np.array([1, 0, 1])),
    ]
    for _ in range(300):
        n = int(rng.integers(2, 400))
        s = np.round(rng.normal(size=n), 1)
        cut = rng.choice(s)
        y = (s > cut).astype(int) if rng.random() < 0.5 else (s < cut).astype(int)
        if rng.random() < 0.3:
            y[rng.integers(n)] ^= 1  # one row across: usually not separated any more
        if 0 < y.sum() < n:
            cases.append((s, y))
    for s, y in cases:
        for smooth in (True, False):
            m = IsotonicMap(smooth_targets=smooth).fit(s, y)
            assert (m.boundary_ is not None) == _separated_direct(s, y), (s, y)


def test_unit_weights_and_the_weighted_path_agree():
    # all weights 2 (a power of two): the same rows counted twice, so the same map bit for bit;
    # all weights 3: the weighted path (other code), equal to 1e-12; near-ties (scores a few
    # ulps apart, pooled by the tie rule) included
    rng = np.random.default_rng(9)
    for trial in range(40):
        n = int(rng.integers(5, 2000))
        s = np.round(rng.normal(size=n), 2)
        s[::3] += s[::3] * 4 * EPS * (trial % 2)  # a few units of rounding apart: tied
        y = (rng.random(n) < expit(2 * s)).astype(int)
        y[:2] = [0, 1]
        for smooth in (True, False):
            m = IsotonicMap(smooth_targets=smooth).fit(s, y)
            twice = IsotonicMap(smooth_targets=smooth).fit(s, y, sample_weight=np.full(n, 2.0))
            np.testing.assert_array_equal(twice.thresholds_, m.thresholds_)
            if not smooth:  # (Platt's targets count a weight of 2 as two rows: other targets)
                np.testing.assert_array_equal(twice.values_, m.values_)
            if not smooth:
                thrice = IsotonicMap(smooth_targets=False).fit(s, y, sample_weight=np.full(n, 3.0))
                grid = np.linspace(s.min() - 1, s.max() + 1, 503)
                np.testing.assert_allclose(thrice.predict(grid), m.predict(grid), atol=1e-12)


def test_inputs_are_not_modified():
    rng = np.random.default_rng(1)
    s = rng.normal(size=500)
    y = (rng.random(500) < expit(s)).astype(int)
    s0, y0 = s.copy(), y.copy()
    IsotonicMap().fit(s, y)
    np.testing.assert_array_equal(s, s0)
    np.testing.assert_array_equal(y, y0)
