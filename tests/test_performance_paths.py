"""Compact fitted representations (issue 16): outputs unchanged, size bounded."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import isotonic_regression
from scipy.special import expit
from sklearn.isotonic import IsotonicRegression

from probwrap.calibration import IsotonicMap
from probwrap.calibration._isotonic import _interpolate, _pool_ties


def _every_distinct_score_map(s, y, w):
    """The previous representation: one breakpoint per distinct training score.

    With unit weights the map's levels are counts: each level's value is its number of
    positives over its number of rows, one exact division (SciPy's running means can be an ulp
    off that), so the reference takes the same mean of each of SciPy's blocks.
    """
    distinct, weight, label_sum = _pool_ties(s, y, w)
    fit = isotonic_regression(label_sum / weight, weights=weight, increasing=True)
    values = fit.x
    if np.all(w == 1.0):
        r = fit.blocks
        means = np.add.reduceat(label_sum, r[:-1]) / np.add.reduceat(weight, r[:-1])
        values = np.repeat(means, np.diff(r))
    return distinct, np.clip(values, 0.0, 1.0)


def test_isotonic_block_ends_predict_exactly_as_every_distinct_score():
    rng = np.random.default_rng(5)
    for trial in range(12):
        n = int(rng.integers(3, 3000))
        s = np.round(rng.normal(size=n) * 2, int(rng.integers(0, 4)))  # ties
        y = (rng.random(n) < expit(s)).astype(float)
        y[:2] = [0.0, 1.0]
        w = rng.uniform(0.2, 3.0, size=n) if trial % 2 else np.ones(n)
        m = IsotonicMap(smooth_targets=False).fit(s, y, sample_weight=w)
        xp, fp = _every_distinct_score_map(s, y, w)
        grid = np.concatenate([xp, np.linspace(s.min() - 1, s.max() + 1, 997), (xp[1:] + xp[:-1]) / 2])
        # consistency test against the previous representation: bit-identical outputs
        np.testing.assert_array_equal(m.predict(grid), _interpolate(grid, xp, fp))
        # reference: scikit-learn's IsotonicRegression (its own pruned breakpoints); 1e-12 allows
        # for the order of summation inside the two PAV implementations
        ref = IsotonicRegression(out_of_bounds="clip").fit(s, y, sample_weight=w)
        np.testing.assert_allclose(m.predict(grid), ref.predict(grid), atol=1e-12)
        # only block ends are kept: no interior point equals both of its neighbours
        v = m.values_
        assert not np.any((v[1:-1] == v[:-2]) & (v[1:-1] == v[2:]))


def test_isotonic_fitted_size_follows_levels_not_rows():
    # 2e5 rows of a two-level truth: the fit has few levels, so few breakpoints, however many rows
    rng = np.random.default_rng(2)
    sizes = []
    for n in (2_000, 200_000):
        s = rng.normal(size=n)
        y = (rng.random(n) < np.where(s > 0, 0.9, 0.1)).astype(float)
        sizes.append(IsotonicMap().fit(s, y).thresholds_.shape[0])
    assert sizes[1] < 0.01 * 200_000  # the previous representation kept all 200,000 scores


def test_unweighted_cutoff_search_equals_the_general_path():
    # consistency test: the per-class sort path (unweighted rows, one cost matrix) against the
    # general argsort path on the same rows, with ties, capacities, tiny and huge scores
    from probwrap.decision import search_cutoff
    from probwrap.decision._cutoff import _prepare, _RowCosts, _search_rows

    rng = np.random.default_rng(8)
    for trial in range(120):
        n = int(rng.integers(1, 300))
        s = np.round(rng.normal(size=n), int(rng.integers(0, 4)))
        if trial % 7 == 0:
            s = np.arange(n) * 1e-320  # denormal gaps
        if trial % 11 == 0:  # gaps wider than the largest double
            s = np.concatenate([np.linspace(-1.7e308, 0, n // 2), np.linspace(1e300, 1.7e308, n - n // 2)])
        y = rng.integers(0, 2, n)
        costs = rng.uniform(-2, 5, (2, 2)) if trial % 2 else rng.integers(-3, 6, (2, 2)).astype(float)
        cap = None if trial % 3 else 0.3
        bounds = (-10.0, 10.0) if trial % 5 == 0 else None
        got = search_cutoff(s, y, costs, capacity=cap, score_bounds=bounds)
        s2, yi, _, matrix, unit = _prepare(s, y, costs, None)
        want = _search_rows(s2, _RowCosts(matrix, yi, None), cap, bounds)
        assert (got.cutoff, got.interval, got.flat) == (want.cutoff, want.interval, want.flat)
        np.testing.assert_array_equal(got.cutoffs, want.cutoffs)
        np.testing.assert_array_equal(got.flagged_share, want.flagged_share)
        np.testing.assert_array_equal(got.admissible, want.admissible)
        # tied rows are summed in a different order by the two paths: last-bit differences
        np.testing.assert_allclose(got.costs, want.costs * unit, rtol=1e-12, atol=1e-12)


def test_tuned_policy_stays_small_with_many_heldout_rows():
    # 30,000 held-out rows (above the 20,000 kept): the fitted wrapper pickles small, the cutoff
    # and the fold cutoffs are those found on every row, and the interval from the tally agrees
    # with the row bootstrap kept by keep_heldout=True (consistency test)
    import pickle

    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    from probwrap import CostPolicyWrapper

    rng = np.random.default_rng(4)
    n = 30_000
    X = rng.normal(size=(n, 2))
    y = (rng.random(n) < expit(X[:, 0] - 1)).astype(int)
    model = FrozenEstimator(LogisticRegression().fit(X[:2000], y[:2000]))
    small = CostPolicyWrapper(model, costs={"fp": 1, "fn": 6}, strategy="tuned", random_state=0,
                              n_resamples=100).fit(X, y)
    full = CostPolicyWrapper(model, costs={"fp": 1, "fn": 6}, strategy="tuned", random_state=0,
                             n_resamples=100, keep_heldout=True).fit(X, y)
    assert len(pickle.dumps(small)) < 600_000 < len(pickle.dumps(full))
    assert small.cutoff_ == full.cutoff_
    assert small.cost_curve_.costs.shape[0] <= 4097 + 130
    assert small.cost_curve_.costs.min() == full.cost_curve_.costs.min()
    a, b = small.cutoff_interval_, full.cutoff_interval_
    # two bootstraps of the same rows (Poisson on 1e-3-wide bins, and rows resampled): their
    # percentile ends differ by resampling noise, well within a third of the interval's width
    width = b.high - b.low
    assert abs(a.low - b.low) < width / 3 and abs(a.high - b.high) < width / 3


def test_venn_abers_compact_pairs_equal_two_isotonic_fits_per_test_score():
    # reference: for each test score, scikit-learn's IsotonicRegression refitted twice on the
    # calibration rows plus the test point labelled 0 and 1 (Vovk, Petej & Fedorova 2015, the
    # definition); the fitted map keeps only the thresholds where the pair changes
    from probwrap.calibration import VennAbersMap

    rng = np.random.default_rng(12)
    n = 300
    s = np.round(rng.normal(size=n) * 2, 1)  # ties
    y = (rng.random(n) < expit(s)).astype(float)
    m = VennAbersMap().fit(s, y)
    assert m.thresholds_.shape[0] < np.unique(s).shape[0]
    # (off the 0.1 grid of the scores: scikit-learn pools X values within 1e-15 as ties)
    grid = np.concatenate([np.unique(s)[::3], np.linspace(-8, 8, 41) + 0.013])
    got = m.predict_interval(grid)
    for j, t in enumerate(grid):
        pair = []
        for label in (0.0, 1.0):
            ref = IsotonicRegression(y_min=0, y_max=1).fit(np.append(s, t), np.append(y, label))
            pair.append(ref.predict([t])[0])
        # 1e-12: the order of summation inside the two PAV implementations
        np.testing.assert_allclose(got[j], pair, atol=1e-12)


def test_row_reductions_equal_numpy_bit_for_bit():
    # consistency test: the column loops behind the prediction fast path (issue 16, point 6)
    # against NumPy's own reductions, for every number of columns either side of the cut-over
    from probwrap._validation import row_max, row_sum

    rng = np.random.default_rng(16)
    for k in range(1, 11):
        for order in "CF":
            for dtype in (np.float64, np.float32):
                a = np.asarray(rng.random((257, k)) * 10.0 ** rng.integers(-8, 8, (257, k)),
                               dtype=dtype, order=order)
                a[3, 0] = np.nan
                a[5, -1] = -0.0
                for keep in (False, True):
                    for ours, ref in ((row_sum(a, keep), a.sum(axis=1, keepdims=keep)),
                                      (row_max(a, keep), a.max(axis=1, keepdims=keep))):
                        assert ours.dtype == ref.dtype and ours.shape == ref.shape
                        np.testing.assert_array_equal(ours, ref)
                        assert np.array_equal(np.signbit(ours), np.signbit(ref))


def test_check_proba_fast_path_keeps_its_messages():

    from probwrap._validation import check_proba

    good = np.array([[0.2, 0.8], [1.0, 0.0]])
    assert check_proba(good, ndim=2) is not None
    for bad, message in (
        ([[np.nan, 1.0]], "contains NaN or infinite values"),
        ([[np.inf, 0.0]], "contains NaN or infinite values"),
        ([[-0.1, 1.1]], r"in \[0, 1\]; got values from -0.1 to 1.1"),
        ([[0.2, 0.7], [0.5, 0.5]], "row 0 sums to 0.9"),
        ([[0.5, 0.5], [0.5, 0.5 + 2e-6]], "row 1 sums to 1"),
    ):
        with pytest.raises(ValueError, match=message):
            check_proba(np.array(bad), name="proba")
    check_proba(np.array([[0.5, 0.5 + 5e-7]]))  # within the 1e-6 tolerance


def test_frozen_model_predicted_in_row_blocks_gives_the_one_call_result(monkeypatch):
    # consistency test: CostPolicyWrapper.fit predicts a large held-out array block by block
    # (issue 16, point 7 memory); for scikit-learn's models the rows come out bit for bit as in
    # one call, and the fitted wrapper is the same
    import warnings

    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neural_network import MLPClassifier

    import probwrap._heldout as heldout
    from probwrap import CostPolicyWrapper

    rng = np.random.default_rng(7)
    X = rng.normal(size=(5000, 6))
    y = (X[:, 0] + rng.normal(size=5000) > 0.5).astype(int)
    models = [LogisticRegression(), HistGradientBoostingClassifier(max_iter=10),
              RandomForestClassifier(n_estimators=5, max_depth=5, random_state=0), GaussianNB(),
              LinearDiscriminantAnalysis(), MLPClassifier(hidden_layer_sizes=(8,), max_iter=30,
                                                          random_state=0)]
    for model in models:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model.fit(X[:1000], y[:1000])
        whole = model.predict_proba(X)
        monkeypatch.setattr(heldout, "PREDICT_CHUNK_ROWS", 700)  # 8 blocks, the last short
        blocks = heldout._predict_in_chunks(model.predict_proba, X)
        np.testing.assert_array_equal(blocks, whole)
        fitted = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 4},
                                   strategy="tuned").fit(X, y)
        monkeypatch.setattr(heldout, "PREDICT_CHUNK_ROWS", 16_384)  # one call
        single = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 4},
                                   strategy="tuned").fit(X, y)
        assert fitted.cutoff_ == single.cutoff_
        assert fitted.heldout_cost_ == single.heldout_cost_
        # heldout_cost_ is the mean cost of the rule predict applies, on the same rows
        flagged = fitted.predict(X) == 1
        cost = np.where(flagged, np.where(y == 1, 0.0, 1.0), np.where(y == 1, 4.0, 0.0))
        assert fitted.heldout_cost_ == pytest.approx(cost.mean(), rel=1e-12)


def _tie_starts_direct(s):
    """The tie rule of ``_tie_starts`` evaluated pair by pair over all rows (its definition)."""
    n = s.shape[0]
    q = max((abs(float(v)) for v in (s[n // 4], s[(3 * n) // 4]) if np.isfinite(v)), default=0.0)
    tol = np.maximum(np.minimum(np.abs(s[1:]), np.abs(s[:-1])), q) * (8 * np.finfo(float).eps)
    with np.errstate(invalid="ignore"):
        return np.concatenate([[True], s[1:] - s[:-1] > tol])


def test_tie_pass_and_separation_shortcuts_equal_their_definitions():
    from probwrap.calibration._isotonic import _tie_starts
    from probwrap.calibration._platt import _separated

    eps = np.finfo(float).eps
    rng = np.random.default_rng(11)
    for trial in range(60):
        # most scores of size about 1, plus clusters of near ties (0-20 units of rounding apart)
        # at sizes from 1e-3 to 1e3, so that both the quartiles' and the pair's own size set
        # the tolerance somewhere; infinite scores now and then
        body = rng.normal(size=int(rng.integers(2, 200)))
        centres = rng.normal(size=4) * 10.0 ** rng.integers(-3, 4, size=4)
        clusters = [c * (1 + eps * np.cumsum(rng.integers(0, 20, size=6))) for c in centres]
        s = np.concatenate([body, *clusters])
        if trial % 7 == 0:
            s[:3] = np.inf
        if trial % 11 == 0:
            s[-1] = -np.inf
        s = np.sort(s)
        first = np.ones(s.shape[0], dtype=bool)
        _tie_starts(s, first)
        np.testing.assert_array_equal(first, _tie_starts_direct(s))
    for trial in range(60):
        # separation read off the two sorted classes equals _separated on the rows: classes
        # split at a cut, with rows tied at the cut in either class, or one row across it
        n = int(rng.integers(2, 60))
        sf = np.round(rng.normal(size=n), 1)
        cut = sf[int(rng.integers(0, n))]
        y = (sf > cut).astype(float)
        at = np.flatnonzero(sf == cut)
        y[at] = rng.random(at.size) < 0.5
        if trial % 4 == 0:
            y[int(rng.integers(0, n))] = 1.0 - y[int(rng.integers(0, n))]
        if trial % 3 == 0:
            y = 1.0 - y
        got: list[bool] = []
        _pool_ties(sf, y, np.ones(n), separation=got)
        assert got == [_separated(sf, y, np.ones(n))]
