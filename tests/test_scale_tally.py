"""Score tallies: building, merging, and every fit from a tally against outside references
(scikit-learn, statsmodels, SciPy, named beside each assertion) and, as consistency tests,
against probwrap's own fit on all the rows."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import minimize_scalar
from scipy.special import expit
from sklearn.isotonic import IsotonicRegression
from sklearn.metrics import brier_score_loss, confusion_matrix

from probwrap.calibration import BetaMap, BinningMap, IsotonicMap, PlattMap, TemperatureMap
from probwrap.decision import search_cutoff
from probwrap.metrics import brier_score, expected_calibration_error
from probwrap.scale import DEFAULT_RESOLUTION, ScoreTally, merge_tallies, tally_scores
from probwrap.shift import bbse_prior, em_prior, heldout_confusion

COSTS = {"fp": 1.0, "fn": 9.0}


def _simulate(n, seed=0, a=1.3, b=-0.4, shift=0.0):
    rng = np.random.default_rng(seed)
    s = rng.normal(shift, 2.0, size=n)
    y = (rng.random(n) < expit(a * s + b)).astype(int)
    return s, y


def _log_loss(p, y):
    p = np.clip(p, 1e-15, 1 - 1e-15)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log1p(-p)))


# -- building and merging -------------------------------------------------------------------------
def test_chunked_and_merged_tallies_equal_the_whole():
    s, y = _simulate(20_000)
    w = np.random.default_rng(1).uniform(0, 3, size=s.shape[0])
    whole = tally_scores(s, y, sample_weight=w, chunk_size=10**9)
    chunked = tally_scores(s, y, sample_weight=w, chunk_size=777)
    parts = [tally_scores(s[i::3], y[i::3], sample_weight=w[i::3]) for i in range(3)]
    merged = merge_tallies(parts[::-1])
    for t in (chunked, merged, parts[0] + parts[1] + parts[2]):
        np.testing.assert_array_equal(t.bins, whole.bins)
        np.testing.assert_allclose(t.counts, whole.counts, rtol=1e-12)
        np.testing.assert_allclose(t.score_sums, whole.score_sums, rtol=1e-10, atol=1e-9)
        assert t.n_rows == whole.n_rows == 20_000
    # counts per bin against a direct count with NumPy's histogram (edges at half-multiples)
    r = DEFAULT_RESOLUTION
    edges = (np.arange(whole.bins[0], whole.bins[-1] + 2) - 0.5) * r
    direct, _ = np.histogram(s[y == 1], bins=edges, weights=w[y == 1])
    occupied = np.zeros(edges.shape[0] - 1)
    occupied[whole.bins - whole.bins[0]] = whole.counts[:, 1]
    np.testing.assert_allclose(occupied, direct, rtol=1e-12, atol=1e-12)


def test_bin_scores_lie_in_their_bins_and_weights_are_row_counts():
    s, y = _simulate(5_000, seed=3)
    t = tally_scores(s, y, resolution=0.01)
    lo, hi = t.bin_edges.T
    assert np.all((t.bin_scores >= lo) & (t.bin_scores < hi))
    doubled = tally_scores(np.r_[s, s[:100]], np.r_[y, y[:100]], resolution=0.01)
    w = np.ones(s.shape[0])
    w[:100] = 2.0
    weighted = tally_scores(s, y, sample_weight=w, resolution=0.01)
    np.testing.assert_allclose(weighted.counts, doubled.counts)
    assert weighted.total_weight == pytest.approx(5_100)


def test_wide_score_ranges_use_sparse_bins():
    s = np.array([-1e5, 0.0, 3.0, 2e5])
    t = tally_scores(s, [0, 1, 0, 1], resolution=1e-3)
    assert t.n_bins == 4
    np.testing.assert_allclose(t.bin_scores, s)


def test_multiclass_label_counts_and_one_vs_rest_rows():
    rng = np.random.default_rng(5)
    s = rng.normal(size=3000)
    y = rng.integers(0, 3, size=3000)
    t = tally_scores(s, y, n_labels=3)
    np.testing.assert_allclose(t.label_weight, np.bincount(y, minlength=3))
    scores, labels, w = t.to_rows(positive=2)
    assert set(np.unique(labels)) == {0, 1}
    assert w[labels == 1].sum() == pytest.approx((y == 2).sum())
    assert w.sum() == pytest.approx(3000)


# -- order-based fits: exact on scores that sit on the bin centres ------------------------------------
def test_isotonic_from_tally_is_exact_on_binned_scores():
    rng = np.random.default_rng(7)
    r = 0.01
    grid = rng.integers(-300, 300, size=30_000) * r
    y = (rng.random(grid.shape[0]) < expit(grid)).astype(int)
    s_rows, y_rows, w_rows = tally_scores(grid, y, resolution=r).to_rows()
    from_tally = IsotonicMap(smooth_targets=False).fit(s_rows, y_rows, sample_weight=w_rows)
    points = np.unique(grid)
    # reference: scikit-learn's IsotonicRegression on every row
    reference = IsotonicRegression(out_of_bounds="clip", y_min=0, y_max=1).fit(grid, y)
    np.testing.assert_allclose(from_tally.predict(points), reference.predict(points), atol=1e-12)
    full = IsotonicMap(smooth_targets=False).fit(grid, y)
    np.testing.assert_allclose(from_tally.predict(points), full.predict(points), atol=1e-12)
    # the default (smoothed) fits agree as well: the tally keeps the weighted class counts
    np.testing.assert_allclose(
        IsotonicMap().fit(s_rows, y_rows, sample_weight=w_rows).predict(points),
        IsotonicMap().fit(grid, y).predict(points),
        atol=1e-12,
    )


def test_isotonic_from_tally_close_to_full_data_fit_on_continuous_scores():
    s, y = _simulate(40_000, seed=11)
    rows = tally_scores(s, y).to_rows()
    from_tally = IsotonicMap().fit(*rows[:2], sample_weight=rows[2])
    # reference: scikit-learn's IsotonicRegression on every row
    reference = IsotonicRegression(out_of_bounds="clip", y_min=0, y_max=1).fit(s, y)
    diff = np.abs(from_tally.predict(s) - reference.predict(s))
    assert diff.mean() < 2e-3


def test_binning_map_from_tally_matches_full_data_on_binned_scores():
    rng = np.random.default_rng(8)
    grid = rng.integers(-200, 200, size=10_000) * 0.01
    y = (rng.random(grid.shape[0]) < expit(grid)).astype(int)
    rows = tally_scores(grid, y, resolution=0.01).to_rows()
    a = BinningMap(n_bins=8).fit(*rows[:2], sample_weight=rows[2])
    b = BinningMap(n_bins=8).fit(grid, y)
    np.testing.assert_allclose(a.predict(grid), b.predict(grid), atol=1e-12)


def test_cutoff_search_from_tally_exact_at_bin_edges():
    s, y = _simulate(30_000, seed=2)
    s_rows, y_rows, w_rows = tally_scores(s, y).to_rows()
    res = search_cutoff(s_rows, y_rows, COSTS, sample_weight=w_rows)
    # every candidate cutoff of the tally lies between two bins; its cost on the full data, from
    # scikit-learn's confusion matrix, equals the tally's cost exactly
    picks = [*range(0, res.cutoffs.shape[0], 997)]
    for cut, cost in [*zip(res.cutoffs[picks], res.costs[picks], strict=True),
                      (res.cutoff, res.cost)]:
        (_, fp), (fn, _) = confusion_matrix(y, (s > cut).astype(int), labels=[0, 1])
        expected = (COSTS["fp"] * fp + COSTS["fn"] * fn) / y.shape[0]
        assert cost == pytest.approx(expected, abs=1e-12)
    full = search_cutoff(s, y, COSTS)
    assert res.cost == pytest.approx(full.cost, rel=1e-3)


# -- parametric maps: within 1e-4 log loss at the default resolution ---------------------------------
@pytest.mark.parametrize("make", [lambda: PlattMap(), BetaMap, TemperatureMap])
def test_parametric_maps_from_tally_within_1e4_log_loss(make):
    s, y = _simulate(50_000, seed=4, a=0.7, b=0.3)
    rows = tally_scores(s, y).to_rows()
    a = make().fit(rows[0], rows[1], sample_weight=rows[2])
    b = make().fit(s, y)
    assert abs(_log_loss(a.predict(s), y) - _log_loss(b.predict(s), y)) < 1e-4


def test_platt_from_tally_equals_statsmodels_binomial_glm_on_bin_counts():
    s, y = _simulate(50_000, seed=9)
    t = tally_scores(s, y)
    rows = t.to_rows()
    fit = PlattMap(smooth_targets=False).fit(rows[0], rows[1], sample_weight=rows[2])
    # reference: statsmodels Binomial GLM with (successes, failures) per bin as the response
    endog = np.column_stack([t.counts[:, 1], t.counts[:, 0]])
    glm = sm.GLM(endog, sm.add_constant(t.bin_scores), family=sm.families.Binomial()).fit()
    grid = np.linspace(-5, 5, 11)
    np.testing.assert_allclose(fit.predict(grid), glm.predict(sm.add_constant(grid)), atol=1e-7)


# -- metrics -----------------------------------------------------------------------------------------
def test_brier_and_ece_from_tally():
    s, y = _simulate(40_000, seed=6)
    p = expit(0.8 * s)
    t = tally_scores(np.log(p) - np.log1p(-p), y)
    proba, labels, w = t.to_rows(proba=True)
    # reference: scikit-learn's brier_score_loss on every row
    assert brier_score(labels, proba[:, 1], sample_weight=w) == pytest.approx(
        brier_score_loss(y, p), abs=2e-5
    )
    ece_tally = expected_calibration_error(labels, proba[:, 1], sample_weight=w, n_bins=15)
    assert ece_tally == pytest.approx(expected_calibration_error(y, p, n_bins=15), abs=1e-3)


# -- prior estimators ---------------------------------------------------------------------------------
def test_em_prior_from_unlabelled_tally():
    s_src, y_src = _simulate(20_000, seed=12)
    src = np.bincount(y_src) / y_src.shape[0]
    s_tgt, _ = _simulate(30_000, seed=13, shift=1.0)
    p_full = np.column_stack([expit(-s_tgt), expit(s_tgt)])
    full = em_prior(p_full, src, tol=1e-10).prior
    proba, w = tally_scores(s_tgt).to_scores(proba=True)
    from_tally = em_prior(proba, src, sample_weight=w, tol=1e-10).prior
    assert abs(from_tally[1] - full[1]) < 2e-3

    # reference: the maximiser of the mixture log-likelihood of the tally rows, by SciPy
    def neg_loglik(pi):
        ratio = np.array([1 - pi, pi]) / src
        return -np.dot(w, np.log(proba @ ratio))

    opt = minimize_scalar(neg_loglik, bounds=(1e-6, 1 - 1e-6), method="bounded",
                          options={"xatol": 1e-10})
    assert from_tally[1] == pytest.approx(opt.x, abs=1e-5)


def test_bbse_prior_from_tallies():
    s_src, y_src = _simulate(20_000, seed=14)
    s_tgt, _ = _simulate(20_000, seed=15, shift=0.8)
    src = np.bincount(y_src) / y_src.shape[0]
    proba_src, y_rows, w_src = tally_scores(s_src, y_src).to_rows(proba=True)
    conf = heldout_confusion(proba_src, y_rows, sample_weight=w_src)
    p_full_src = np.column_stack([expit(-s_src), expit(s_src)])
    # reference: scikit-learn's confusion matrix of the full rows (rows predicted, columns true).
    # Tolerance: a tally gives all rows of a bin its mean score, so only rows of the bin that
    # straddles the decision point 0 (scores in [-r/2, r/2), r = 1e-3) can change their predicted
    # class; each entry can move by at most their share.
    straddling = np.mean(np.abs(s_src) < 0.5e-3)
    conf_ref = confusion_matrix(y_src, (s_src > 0).astype(int)).T / y_src.shape[0]
    np.testing.assert_allclose(conf, conf_ref, rtol=0, atol=straddling + 1e-12)
    proba_tgt, w_tgt = tally_scores(s_tgt).to_scores(proba=True)
    from_tally = bbse_prior(proba_tgt, conf, src, sample_weight=w_tgt).prior
    full = bbse_prior(np.column_stack([expit(-s_tgt), expit(s_tgt)]),
                      heldout_confusion(p_full_src, y_src), src).prior
    assert abs(from_tally[1] - full[1]) < 2e-3  # consistency with the full-row estimate


# -- bad input ---------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"resolution": 0}, "resolution"),
        ({"resolution": -1e-3}, "resolution"),
        ({"sample_weight": [1, -1, 1]}, "sample_weight"),
        ({"sample_weight": [1, 1]}, "sample_weight"),
        ({"n_labels": 0}, "n_labels"),
    ],
)
def test_bad_input_names_the_argument(kwargs, match):
    with pytest.raises(ValueError, match=match):
        tally_scores([0.1, 0.2, 0.3], [0, 1, 1], **kwargs)


def test_bad_labels_scores_and_merges():
    with pytest.raises(ValueError, match="y"):
        tally_scores([0.1, 0.2], [0, 1, 1])
    with pytest.raises(ValueError, match="y"):
        tally_scores([0.1, 0.2], [0, 2])
    with pytest.raises(ValueError, match="scores"):
        tally_scores([], [])
    with pytest.raises(ValueError, match="scores"):
        tally_scores([0.1, np.nan], [0, 1])
    with pytest.raises(ValueError, match="resolution"):
        tally_scores([0.1], [0]) + tally_scores([0.1], [0], resolution=0.1)
    with pytest.raises(ValueError, match="label"):
        tally_scores([0.1], [0]) + tally_scores([0.1])
    with pytest.raises(ValueError, match="to_scores"):
        tally_scores([0.1]).to_rows()
    with pytest.raises(ValueError, match="positive"):
        tally_scores([0.1], [0]).to_rows(positive=2)
    with pytest.raises(ValueError, match="tallies"):
        merge_tallies([])
    assert isinstance(tally_scores([0.0], [1]), ScoreTally)


def test_core_imports_and_tallies_without_dask():
    import subprocess
    import sys

    code = (
        "import sys\n"
        "class Block:\n"
        "    def find_spec(self, name, path=None, target=None):\n"
        "        if name == 'dask' or name.startswith(('dask.', 'distributed')):\n"
        "            raise ImportError('blocked: ' + name)\n"
        "sys.meta_path.insert(0, Block())\n"
        "import probwrap, probwrap.scale, probwrap.aggregated\n"
        "t = probwrap.scale.tally_scores([0.1, 0.2], [0, 1])\n"
        "assert t.n_bins == 2 and not any(m.startswith('dask') for m in sys.modules)\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
