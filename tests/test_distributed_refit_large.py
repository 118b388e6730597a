"""More than 20,000 two-class Dask rows after an in-memory fit with a refit base model: the score
interval and the shift test read the fold models' scores as sums taken where the rows live.

Such rows come back as a tally of the refit model's score, which each row's fold-model scores
cannot join. The score interval (:func:`probwrap.shift.score_interval`) reads the unlabelled
rows only through the weighted mean and second moment of the fold-averaged score
:math:`\\bar u(x; \\pi)` at each candidate prior, so one more pass sums them on a grid of
priors (0, 1, the source share and log-odds -20..20 by 0.1) and the client interpolates
(:mod:`probwrap.shift._fold_moments`). Before 4 December 2026 these rows warned and the
interval read the refit model only (breast cancer, 300 rows forced onto the tally path: interval
[0.2025, 0.3123] against [0.2053, 0.3155] in memory, shift statistic 9.77 against 9.22; 30,000
rows, not forced: lower end 0.1761 against 0.1793, statistic 53.5 against 51.1). The
in-memory path is the reference (itself checked against NumPy in
tests/test_prior_shift_refit_interval.py); the fold posteriors are also rebuilt with
scikit-learn's ``StratifiedKFold`` and ``clone``. Data: scikit-learn's bundled breast cancer.

The point estimate: in memory it reads every unlabelled row once per fold model, weighted by the
fold's share (docs/evidence/prior_shift_log.md, "The point estimate after a refit"). The pass that sums the
grid also tallies those rows (each row's log-odds once per fold model), and the estimate reads
the bins; with more than two classes (digits) the stacked fold posteriors stay on the workers
for EM's passes. Before, both read the refit model (0.003-0.004 off in memory's estimate here,
0.002-0.005 on digits), without a warning.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift._fold_moments import fold_score_block, score_grid
from probwrap.shift._interval import fold_shares

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")

REFIT = "does not carry how much that refit moves"


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn()


def _caught(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(c.message) for c in caught]


@pytest.fixture(scope="module")
def cancer():
    """Breast cancer, "malignant" positive: 250 labelled rows; 300 unlabelled rows resampled
    from the others at prevalence 0.2 with a little noise (so rows are not copies), weights
    0.5-2; a refit wrapper (3 folds)."""
    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    assert np.array_equal(lab, _labelled_rows())
    cls = (rng.uniform(size=300) < 0.2).astype(int)
    rows = np.where(cls == 1, rng.choice(pool[y[pool] == 1], 300),
                    rng.choice(pool[y[pool] == 0], 300))
    X_new = X[rows] + rng.normal(0, 0.01, (300, X.shape[1])) * X.std(0)
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(X[lab],
                                                                                  y[lab]))
    return X[lab], y[lab], X_new, rng.uniform(0.5, 2.0, 300), model


def _labelled_rows():
    """The rows of breast cancer labelled in the ``cancer`` fixture (the same draw)."""
    return np.random.default_rng(3).permutation(569)[:250]


def _direct_fold_proba(X, y, X_new, seed, n_folds=3):
    return [clone(_model()).fit(X[train], y[train]).predict_proba(X_new)
            for train, _ in StratifiedKFold(n_folds, shuffle=True,
                                            random_state=seed).split(X, y)]


@pytest.mark.parametrize("weighted", [False, True])
def test_large_binary_adapt_reads_the_fold_models_as_in_memory(cancer, tally_path, weighted):
    X, y, X_new, w, model = cancer
    sw = w if weighted else None
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=sw))
    dist, messages = _caught(lambda: copy.deepcopy(model).adapt(
        da.from_array(X_new, chunks=(75, 30)),
        sample_weight=None if sw is None else da.from_array(sw, chunks=75)))
    assert not [m for m in messages if REFIT in m]
    # the interval to 1e-6 (measured 3e-8: the spline between grid priors and the tally's bins
    # behind the refit model's estimate); the shift test reads the sums at the source prior
    np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                               rtol=0, atol=1e-6)
    assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=1e-9)
    # the point estimate reads every row once per fold model, weighted by the fold's share,
    # as in memory (a tally of those rows taken in the same pass as the sums; measured 3e-11
    # relative here, each row its own bin). Before: the refit model's tally, 0.003-0.004 off
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-6, atol=0)
    np.testing.assert_allclose(dist.prior_estimate_.ml_prior, mem.prior_estimate_.ml_prior,
                               rtol=1e-6, atol=0)
    assert dist.adaptation_weight_ == pytest.approx(mem.adaptation_weight_, rel=1e-6)
    assert dist.prior_estimate_.null_harm_scale == pytest.approx(
        mem.prior_estimate_.null_harm_scale, rel=1e-6)
    # the fold models made the difference: the refit model's scores alone (the path before)
    est = model.prior_estimator_
    without = _quiet(lambda: est.estimate(model.estimator_.predict_proba(X_new), sw))
    assert np.max(np.abs(without.prior - mem.target_prior_)) > 1e-3
    assert abs(without.shift_statistic - mem.shift_statistic_) > 0.3
    assert np.max(np.abs(without.interval - mem.target_prior_interval_)) > 1e-3


def test_point_estimate_is_the_fold_averaged_root_beyond_the_limit(cancer):
    # 30,000 rows (not forced: beyond KEPT_ROWS, so they come back as tallies and sums), a
    # share of 0.02: target_prior_ equals adapt on the same rows in memory, and the maximum-
    # likelihood share is the root of the fold-averaged score equation (Saerens, Latinne &
    # Decaestecker 2002, eqs. 2.9-2.10, each row's score averaged over the fold models,
    # sum_i w_i sum_k s_k u(p_ik; pi) = 0) found by SciPy's brentq on fold posteriors rebuilt
    # with scikit-learn. Before 4 December 2026 (the refit model's tally): 0.01628 against
    # 0.01846 in memory; now 0.018461969 (6.5e-9 relative)
    from scipy.optimize import brentq

    X, y, _, _, model = cancer
    X_all, y_all = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(11)
    pool = np.setdiff1d(np.arange(y_all.shape[0]), _labelled_rows())
    y_all = (y_all == 0).astype(int)
    cls = rng.uniform(size=30_000) < 0.02
    rows = np.where(cls, rng.choice(pool[y_all[pool] == 1], 30_000),
                    rng.choice(pool[y_all[pool] == 0], 30_000))
    X_new = X_all[rows] + rng.normal(0, 0.01, (30_000, X.shape[1])) * X_all.std(0)
    w = rng.uniform(0.5, 2.0, 30_000)
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=w))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(7_500, 30)),
                                                     sample_weight=da.from_array(w, chunks=7_500)))
    assert dist.prior_estimate_.n_rows < 30_000  # (bins of a tally, not the rows)
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-6, atol=0)
    np.testing.assert_allclose(dist.prior_estimate_.ml_prior, mem.prior_estimate_.ml_prior,
                               rtol=1e-6, atol=0)
    assert dist.adaptation_weight_ == pytest.approx(mem.adaptation_weight_, rel=1e-6)
    est = model.prior_estimator_
    fp = np.stack([est.calibrate(f) for f in _direct_fold_proba(X, y, X_new, 0)])
    kept = est._source_rows()
    share = fold_shares(est._src_fold, kept[1], kept[2], 3)[0]
    q = fp / est.source_prior_
    a, d = q[:, :, 0], q[:, :, 1] - q[:, :, 0]

    def score(t):
        return float(w @ np.einsum("k,kn->n", share, d / (a + t * d)))

    root = brentq(score, 1e-9, 1 - 1e-9, xtol=1e-14)
    assert dist.prior_estimate_.ml_prior[1] == pytest.approx(root, rel=1e-5)
    # the refit model's estimate (the path before) is far off by that measure
    without = _quiet(lambda: est.estimate(model.estimator_.predict_proba(X_new), w))
    assert abs(without.ml_prior[1] - root) > 1e-3


def test_fold_models_predicting_give_the_in_memory_harm_scale(cancer, tally_path):
    # predict_with="fold_models": the evidence gate's harm scale reads the fold models'
    # average posterior (sums taken in the same pass), as in memory; before, the refit's tally
    X, y, X_new, _, _ = cancer
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0,
                                             predict_with="fold_models").fit(X, y))
    assert model.predicted_with_ == "fold_models"
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(75, 30))))
    assert dist.prior_estimate_.null_harm_scale == pytest.approx(
        mem.prior_estimate_.null_harm_scale, rel=1e-6)
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-6, atol=0)
    refit_scale = _quiet(lambda: model.prior_estimator_.estimate(
        model.prior_estimator_.calibrate(model.estimator_.predict_proba(X_new)))).null_harm_scale
    assert abs(refit_scale / mem.prior_estimate_.null_harm_scale - 1) > 0.05


@pytest.mark.parametrize("kind", ["percentile", "bca"])
def test_bootstrap_interval_beyond_the_limit_reads_the_fold_models(cancer, tally_path, kind):
    # a bootstrap interval on more than 20,000 two-class rows (forced): the pass that sums the
    # fold-averaged score and tallies every row once per fold model also draws the tally's
    # Poisson replicates, one draw per row shared by its fold copies, as the in-memory
    # bootstrap after a refit resamples (PriorEstimator._bootstrap with copies). Before 4
    # December 2026 the estimate, the shift test and the interval read the refit model's tally,
    # with a warning: target_prior_ 0.26576 against 0.26868 in memory, statistic 9.77 against
    # 9.22. Now the estimate and statistic are memory's
    X, y, X_new, _, _ = cancer
    boot = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, interval=kind, n_resamples=400,
                                            random_state=0).fit(X, y))
    mem = _quiet(lambda: copy.deepcopy(boot).adapt(X_new))
    dist, messages = _caught(lambda: copy.deepcopy(boot).adapt(
        da.from_array(X_new, chunks=(75, 30))))
    assert not [m for m in messages if REFIT in m]
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-6, atol=0)
    assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=1e-9)
    assert dist.adaptation_weight_ == pytest.approx(mem.adaptation_weight_, rel=1e-6)
    # the interval: other Poisson draws of the same resampling (and for "bca" the tally path's
    # bias correction without the jackknife's acceleration), so equal up to the bootstrap's own
    # noise: ends within 0.2 of the width. Measured here: percentile [0.2011, 0.3194] against
    # [0.1904, 0.3152] in memory (before [0.2026, 0.3162]), bca [0.2028, 0.3215] against
    # [0.1871, 0.3132]; over 6 seeds (percentile) the mean ends 0.1973 / 0.3195 in memory and
    # 0.2015 / 0.3190 here, each +- 0.002 (before 0.2022 / 0.3183)
    lo_m, hi_m = mem.target_prior_interval_[1]
    lo_d, hi_d = dist.target_prior_interval_[1]
    width = hi_m - lo_m
    assert abs(lo_d - lo_m) < 0.2 * width and abs(hi_d - hi_m) < 0.2 * width
    assert lo_d <= dist.target_prior_[1] <= hi_d
    # the refit model's tally (the path before) is off by more: its estimate
    est = boot.prior_estimator_
    without = _quiet(lambda: est.estimate(boot.estimator_.predict_proba(X_new)))
    assert np.max(np.abs(without.prior - mem.target_prior_)) > 1e-3


def test_bootstrap_replicates_share_a_row_s_draw_across_fold_models(cancer, tally_path):
    # the replicate weights of the rows once per fold model: block i's rows draw Poisson(1)
    # counts from numpy's default_rng([seed, 4, i]) (one per row and replicate), and every fold
    # copy of a row carries the row's count; the total of replicate b is then
    # sum_rows w_r c_rb (the folds' shares sum to 1), rebuilt here from NumPy's generator. Draws
    # per copy (independent across the fold models) would give other totals
    from probwrap.scale._rows import unlabelled_proba_from_rows
    from probwrap.scale._tally import replicate_seed

    _, _, X_new, w, model = cancer
    est = model.prior_estimator_
    B, chunk = 30, 75
    out = unlabelled_proba_from_rows(
        model.estimator_, da.from_array(X_new, chunks=(chunk, 30)),
        da.from_array(w, chunks=chunk), n_replicates=B, random_state=5,
        folds=model._fold_scorer(), moments_of=est, fold_replicates=B)
    moments = out[3]
    assert moments.row_replicates.shape == (B, moments.rows[1].shape[0])
    seed = replicate_seed(5)
    totals = np.zeros(B)
    for i in range(X_new.shape[0] // chunk):
        rng = np.random.default_rng([seed, 4, i])
        wb = w[i * chunk:(i + 1) * chunk]
        for b in range(B):
            totals[b] += wb @ rng.poisson(1.0, size=chunk)
    np.testing.assert_allclose(moments.row_replicates.sum(axis=1), totals, rtol=1e-12)
    # the replicates' mean is the rows' weight (Poisson(1) has mean 1), bin by bin
    np.testing.assert_allclose(moments.row_replicates.sum(axis=1).mean(), w.sum(), rtol=0.05)


@pytest.fixture(scope="module")
def digits():
    """scikit-learn's digits: 400 labelled rows, 400 unlabelled; a refit wrapper (3 folds)."""
    X, y = load_digits(return_X_y=True)
    order = np.random.default_rng(1).permutation(y.shape[0])
    lab, new = order[:400], order[400:800]
    return X[lab], y[lab], X[new]


@pytest.mark.parametrize("kind", [{}, dict(method="bbse"), dict(predict_with="fold_models"),
                                  dict(n_resamples=0)])
def test_large_multiclass_adapt_is_the_in_memory_adapt(digits, tally_path, kind):
    # more than 20,000 rows of ten classes (forced): the fold models' calibrated posteriors of
    # every row stay on the workers, each row once per fold model weighted by the fold's share,
    # and EM's passes (BBSE's one pass) read them: target_prior_ is adapt's in memory
    X, y, X_new = digits
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0, **kind).fit(X, y))
    w = np.random.default_rng(7).uniform(0.5, 2.0, X_new.shape[0])
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=w))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(100, 64)),
                                                     sample_weight=da.from_array(w, chunks=100)))
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-9, atol=1e-12)
    assert dist.adaptation_weight_ == pytest.approx(mem.adaptation_weight_, rel=1e-9)
    assert dist.prior_estimate_.null_harm_scale == pytest.approx(
        mem.prior_estimate_.null_harm_scale, rel=1e-9)
    # the NoShiftHarmWarning's ratio from the same sums (None here before 4 December 2026)
    assert dist.prior_estimate_.null_move_ratio == pytest.approx(
        mem.prior_estimate_.null_move_ratio, rel=1e-9)
    if mem.prior_estimate_.ml_prior is not None:
        np.testing.assert_allclose(dist.prior_estimate_.ml_prior, mem.prior_estimate_.ml_prior,
                                   rtol=1e-9, atol=1e-12)
    if dist.target_prior_interval_ is not None:
        np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                                   rtol=0, atol=1e-9)
    # the refit model's posteriors (the path before) give another estimate
    est = model.prior_estimator_
    without = _quiet(lambda: est.estimate(model.estimator_.predict_proba(X_new), w))
    assert np.max(np.abs(without.prior - mem.target_prior_)) > 1e-3


def test_grid_sums_give_the_rows_moments_at_any_prior(cancer):
    # the unlabelled side of score_interval computed from the rows (fold posteriors rebuilt with
    # scikit-learn, calibrated by the wrapper's map), against the grid sums interpolated at
    # priors off the grid
    X, y, X_new, w, model = cancer
    est = model.prior_estimator_
    fp = np.stack([est.calibrate(f) for f in _direct_fold_proba(X, y, X_new, 0)])
    src = est.source_prior_
    kept = est._source_rows()
    share = fold_shares(est._src_fold, kept[1], kept[2], 3)[0]
    sums = fold_score_block(fp[:, :150], share, src, w[:150], score_grid(src[1])) + \
        fold_score_block(fp[:, 150:], share, src, w[150:], score_grid(src[1]))
    t = np.array([0.0, 1e-12, 1e-4, 0.0371, 0.2, 0.5, 0.77, 0.9999, 1.0, src[1]])
    q = fp / src
    a, d = q[:, :, 0], q[:, :, 1] - q[:, :, 0]
    u = np.einsum("k,knt->nt", share, d[:, :, None] / (a[:, :, None] + t * d[:, :, None]))
    wn = w / w.sum()
    mean = wn @ u
    var = wn @ (u * u) - mean**2
    got_mean, got_var = sums.moments(t)
    np.testing.assert_allclose(got_mean, mean, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(got_var, var, rtol=1e-5, atol=1e-9)
    # at the source prior (a grid point) the shift test's moments are the sums themselves
    m_src, c_src = sums.test_moments(src)
    assert m_src[0] == pytest.approx(mean[-1], rel=1e-12)
    assert c_src[0, 0] == pytest.approx(var[-1], rel=1e-9)
