"""PriorShiftWrapper keeps a tally, not the held-out rows, beyond 20,000 rows (keep_heldout)."""

from __future__ import annotations

import pickle
import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper


def gaussian_data(n, prior, rng, sep=1.5):
    y = (rng.uniform(size=n) < prior).astype(int)
    return rng.normal(sep * y, 1.0)[:, None], y


@pytest.fixture(scope="module")
def frozen():
    rng = np.random.default_rng(0)
    X, y = gaussian_data(2000, 0.3, rng)
    return FrozenEstimator(LogisticRegression().fit(X, y))


def _fit_adapt(model, X, y, X_new):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return model.fit(X, y).adapt(X_new)


def test_slim_fit_matches_full_fit(frozen):
    # Consistency test (slim fit against keep_heldout=True on the same 30,000 rows): everything
    # fit derives from the rows is computed on every row, so predictions, the estimate and the
    # shift statistic are identical; the score interval reads the tally's bins (width 1e-3 on
    # the log-odds scale, each at its mean), which moves its ends by far less than 1e-5
    # (measured 6e-8; the interval is about 0.03 wide).
    rng = np.random.default_rng(1)
    X, y = gaussian_data(30_000, 0.3, rng)
    X_new, _ = gaussian_data(3000, 0.5, rng)
    slim = _fit_adapt(PriorShiftWrapper(frozen), X, y, X_new)
    full = _fit_adapt(PriorShiftWrapper(frozen, keep_heldout=True), X, y, X_new)
    assert slim.prior_estimator_._source_row_counts() is not None
    assert full.prior_estimator_._source_row_counts() is None
    np.testing.assert_array_equal(slim.predict_proba(X_new), full.predict_proba(X_new))
    np.testing.assert_array_equal(slim.target_prior_, full.target_prior_)
    assert slim.shift_statistic_ == full.shift_statistic_
    assert slim.adaptation_weight_ == full.adaptation_weight_
    np.testing.assert_allclose(slim.target_prior_interval_, full.target_prior_interval_,
                               atol=1e-5)
    # the bin counts add up to the rows and the bin weights to the total weight
    counts = slim.prior_estimator_._source_row_counts()
    assert counts.sum() == pytest.approx(30_000)
    assert len(counts) < 2 * 8192 + 4


def test_slim_bootstrap_resamples_rows_not_bins(frozen):
    # Consistency test of the Poisson bootstrap of the bin counts: a bin of c rows holds
    # Poisson(c) rows of a resample, so the percentile interval has the width of the row
    # bootstrap. Resampling each bin as one row (Poisson(1) times its weight) would make it
    # several times wider: coarse bins (0.05 on the log-odds scale, ~150 rows each) and as
    # many unlabelled as labelled rows make the labelled side count (measured widths 0.032
    # against 0.034 for the rows, 0.126 with bins taken as rows). 200 resamples: the Monte
    # Carlo error of a 95 % percentile width is about 10 % (common practice), so 30 %.
    rng = np.random.default_rng(2)
    X, y = gaussian_data(25_000, 0.3, rng)
    X_new, _ = gaussian_data(10_000, 0.4, rng)
    kw = dict(interval="percentile", n_resamples=200, random_state=0, tally_resolution=0.05)
    slim = _fit_adapt(PriorShiftWrapper(frozen, **kw), X, y, X_new)
    full = _fit_adapt(PriorShiftWrapper(frozen, keep_heldout=True, **kw), X, y, X_new)
    w_slim = np.diff(slim.target_prior_interval_[1])[0]
    w_full = np.diff(full.target_prior_interval_[1])[0]
    assert w_slim == pytest.approx(w_full, rel=0.3)


def test_pickle_size_does_not_grow_with_rows(frozen):
    rng = np.random.default_rng(3)
    X, y = gaussian_data(200_000, 0.3, rng)
    X_new, _ = gaussian_data(2000, 0.5, rng)
    sizes = []
    for n in (20_001, 200_000):
        model = _fit_adapt(PriorShiftWrapper(frozen, n_resamples=20, interval="percentile",
                                             random_state=0), X[:n], y[:n], X_new)
        blob = pickle.dumps(model)
        sizes.append(len(blob))
        # the unpickled wrapper adapts again (the bootstrap cache is rebuilt on demand)
        again = pickle.loads(blob)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            again.adapt(X_new)
        np.testing.assert_allclose(again.target_prior_interval_, model.target_prior_interval_)
    # 10x the rows: the tally has at most 2 x 8,192 bins (rows kept: it would be 10x)
    assert sizes[1] < 1_000_000
    assert sizes[1] < 2 * sizes[0]


def test_keep_heldout_must_be_bool(frozen):
    X, y = gaussian_data(200, 0.3, np.random.default_rng(4))
    with pytest.raises(ValueError, match="keep_heldout"):
        PriorShiftWrapper(frozen, keep_heldout="yes").fit(X, y)
