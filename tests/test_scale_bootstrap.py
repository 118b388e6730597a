"""Poisson-bootstrap replicates carried by score tallies, and the intervals built from them,
against the in-memory (multinomial) bootstrap of the same rows."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper, PriorShiftWrapper
from probwrap.scale import merge_tallies, tally_scores
from probwrap.scale._bootstrap import tally_cutoff_interval, tally_prior_interval
from probwrap.shift import PriorEstimator

# the tally / reduction path, also on few rows (conftest.py)
pytestmark = pytest.mark.usefixtures("tally_path")

COSTS = {"fp": 1.0, "fn": 6.0}


def _data(n, seed, shift=0.0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3)) + shift
    logit = X @ np.array([1.0, -0.7, 0.4]) - 1.0
    y = (rng.random(n) < expit(1.4 * logit)).astype(int)
    return X, y


def test_replicates_are_poisson_reweighted_counts_and_merge():
    rng = np.random.default_rng(0)
    s = rng.normal(size=5000)
    y = (rng.random(5000) < expit(s)).astype(int)
    w = rng.uniform(0.5, 2.0, size=5000)
    t = tally_scores(s, y, sample_weight=w, n_replicates=50, random_state=3, chunk_size=1000)
    assert t.replicates.shape == (50, t.n_bins, 2)
    # replicate totals: sum_i w_i * Poisson(1)_i has mean sum w and variance sum w^2
    totals = t.replicates.sum(axis=(1, 2))
    assert abs(totals.mean() - w.sum()) < 4 * np.sqrt(np.sum(w**2) / 50)
    assert t.squared_weight == pytest.approx(np.sum(w**2))
    # deterministic given random_state and the chunk index; chunks merge like the counts
    again = tally_scores(s, y, sample_weight=w, n_replicates=50, random_state=3, chunk_size=1000)
    np.testing.assert_array_equal(again.replicates, t.replicates)
    parts = [
        tally_scores(s[i:i + 2500], y[i:i + 2500], sample_weight=w[i:i + 2500],
                     n_replicates=50, random_state=i)
        for i in (0, 2500)
    ]
    merged = merge_tallies(parts)
    # merging adds replicate counts bin by bin (checked per label total and on one bin)
    np.testing.assert_allclose(
        merged.replicates.sum(axis=1), parts[0].replicates.sum(axis=1) + parts[1].replicates.sum(axis=1)
    )
    b0 = parts[0].bins[0]
    expect = sum(p.replicates[:, p.bins == b0].sum(axis=1) for p in parts)
    np.testing.assert_allclose(merged.replicates[:, merged.bins == b0].sum(axis=1), expect)
    rw = t.replicate_row_weights()
    _, _, w_rows = t.to_rows()
    assert rw.shape == (50, w_rows.shape[0])
    np.testing.assert_allclose(rw.sum(axis=1), totals)


def test_tally_cutoff_interval_matches_the_in_memory_bootstrap():
    # Consistency test: probwrap.decision.cutoff_interval resamples the rows themselves
    # (multinomial bootstrap, Efron & Tibshirani 1993, ch. 13). With B = 300 resamples each, the
    # Monte-Carlo standard error of a 2.5 % / 97.5 % percentile is about 0.16 standard deviations
    # of the bootstrap distribution (= 0.04 of the 95 % width), so the endpoints of the two
    # intervals agree within 0.25 of the width (about 4 standard errors of their difference).
    from probwrap.decision import cutoff_interval

    rng = np.random.default_rng(1)
    s = np.round(rng.normal(-1.0, 1.5, size=20_000), 3)  # on bin centres: the rows are exact
    y = (rng.random(20_000) < expit(s)).astype(int)
    t = tally_scores(s, y, n_replicates=300, random_state=0)
    mine = tally_cutoff_interval(t, COSTS)
    ref = cutoff_interval(expit(s), y, COSTS, score_bounds=(0.0, 1.0), n_resamples=300,
                          random_state=0)
    width = ref.high - ref.low
    assert width > 0
    assert abs(mine.low - ref.low) < 0.25 * width
    assert abs(mine.high - ref.high) < 0.25 * width
    assert mine.fold_cutoffs.shape == (0,)


def test_tally_prior_interval_covers_like_the_in_memory_bootstrap():
    # Small seeded coverage simulation: class-conditional scores N(+-1, 1) give exact posteriors
    # expit(2 s) at prior 1/2; the unlabelled batch has true prior 0.3 (the outside fact: the
    # coverage of the true value). Consistency: the in-memory multinomial bootstrap of
    # PriorEstimator.estimate on the same rows. Both 90 % intervals
    # cover 0.3 in about 80-85 % of runs here (a percentile interval from 60 resamples of
    # 1500 + 1500 rows undercovers a little; measured over 100 runs: 0.84 from tallies, 0.81
    # in memory). Over these 40 runs we require at least 75 % for the tally interval and a
    # coverage within 0.15 of the in-memory one.
    rng = np.random.default_rng(2)
    covered = covered_ref = 0
    runs = 40
    for run in range(runs):
        ys = rng.random(1500) < 0.5
        ss = rng.normal(np.where(ys, 1.0, -1.0))
        yt = rng.random(1500) < 0.3
        st = rng.normal(np.where(yt, 1.0, -1.0))
        src = tally_scores(2 * ss, ys.astype(int), resolution=0.05, n_replicates=60,
                           random_state=run)
        tgt = tally_scores(2 * st, resolution=0.05, n_replicates=60, random_state=1000 + run)
        sp, sy, sw = src.to_rows(proba=True)
        est = PriorEstimator(calibration=None, n_resamples=60, confidence_level=0.9)
        est.fit(sp, sy, sw)
        tp, tw = tgt.to_scores(proba=True)
        point = est._point(est.calibrate(tp), tw, est.source_prior_, est.confusion_,
                           est.soft_confusion_).prior
        ci = tally_prior_interval(est, src, tp, tw, tgt, point, n_replicates=60, seed=run)
        covered += ci[1, 0] <= 0.3 <= ci[1, 1]

        def proba(s):
            return np.column_stack([expit(-2 * s), expit(2 * s)])

        ref = PriorEstimator(calibration=None, n_resamples=60, confidence_level=0.9,
                             random_state=run).fit(proba(ss), ys.astype(int))
        ri = ref.estimate(proba(st)).interval
        covered_ref += ri[1, 0] <= 0.3 <= ri[1, 1]
    assert covered >= 0.75 * runs
    assert abs(covered - covered_ref) <= 0.15 * runs


@pytest.fixture(scope="module")
def model():
    X, y = _data(2000, seed=0)
    return FrozenEstimator(LogisticRegression(C=0.05).fit(X, y))


def test_dask_cutoff_interval_agrees_with_in_memory(client, model):
    da = pytest.importorskip("dask.array")
    X, y = _data(20_000, seed=5)
    kw = dict(costs=COSTS, strategy="tuned", n_resamples=300, random_state=0)
    remote = CostPolicyWrapper(model, **kw).fit(
        da.from_array(X, chunks=(5000, 3)), da.from_array(y, chunks=5000)
    )
    local = CostPolicyWrapper(model, **kw).fit(X, y)
    a, b = remote.cutoff_interval_, local.cutoff_interval_
    width = b.high - b.low  # Monte-Carlo tolerance as in the tally-level test above
    assert abs(a.low - b.low) < 0.25 * width and abs(a.high - b.high) < 0.25 * width
    # same seed, same blocks: the same interval again (draws depend on seed and block index)
    again = CostPolicyWrapper(model, **kw).fit(
        da.from_array(X, chunks=(5000, 3)), da.from_array(y, chunks=5000)
    )
    np.testing.assert_array_equal(again.cutoff_interval_.bootstrap_cutoffs, a.bootstrap_cutoffs)


@pytest.mark.parametrize("interval", ["score", "bca"])
def test_dask_prior_interval_agrees_with_in_memory(client, model, interval):
    # "score": computed from the tallies (no replicates); "bca": Poisson replicates tallied on
    # the workers (bias-corrected percentile) against the in-memory BCa bootstrap
    da = pytest.importorskip("dask.array")
    X, y = _data(20_000, seed=7)
    X_new, _ = _data(10_000, seed=8, shift=0.6)
    kw = dict(n_resamples=100, random_state=0, interval=interval)
    remote = PriorShiftWrapper(model, **kw).fit(
        da.from_array(X, chunks=(5000, 3)), da.from_array(y, chunks=5000)
    ).adapt(da.from_array(X_new, chunks=(5000, 3)))
    local = PriorShiftWrapper(model, **kw).fit(X, y).adapt(X_new)
    a, b = remote.target_prior_interval_[1], local.target_prior_interval_[1]
    width = b[1] - b[0]
    # B = 100: percentile standard error ~0.06 of the width each; 0.3 of the width is ~3.5 SE
    assert abs(a[0] - b[0]) < 0.3 * width and abs(a[1] - b[1]) < 0.3 * width
    # mixed: in-memory fit, Dask adapt (labelled rows get Poisson weights on the client)
    mixed = PriorShiftWrapper(model, **kw).fit(X, y).adapt(da.from_array(X_new, chunks=5000))
    c = mixed.target_prior_interval_[1]
    assert abs(c[0] - b[0]) < 0.3 * width and abs(c[1] - b[1]) < 0.3 * width
