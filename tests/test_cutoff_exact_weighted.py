"""The exact cutoff range (``exact_low`` / ``exact_high``) with unequal row weights.

Until 4 December 2026 it was NaN whenever the weights differed ("the tests count rows"), on
rows, on tallies (Dask / Spark, and the cost policy's in-memory summary) and in
``probwrap cutoff``. Now the rows between two cutoffs count as Kish's (1965) effective number
``n = (sum w)^2 / sum w^2`` with the weighted positive share kept, ``c = n * (sum w y) / sum w``,
and the one-sided binomial tails are the regularised incomplete beta functions they equal for
whole counts. Under the null (every row between two cutoffs positive with probability
``even``) the weighted share then has the binomial share's mean and variance exactly.

References (outside the project): scikit-learn's bundled breast cancer data; the range is
rebuilt pair of cutoffs by pair, with direct sums over the rows between them, from SciPy's
``scipy.stats.beta`` distribution (``P(Binomial(n, p) <= c) = beta.sf(p, c + 1, n - c)`` and
``P(X >= c) = beta.cdf(p, c, n - c + 1)``, the identities of e.g. Johnson, Kemp & Kotz 2005,
Univariate Discrete Distributions, eq. 3.34, from memory), and its tails against
``scipy.stats.binom`` at whole counts; the least-cost cutoffs from weighted sums of costs.
"""

from __future__ import annotations

import json
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import logit
from scipy.stats import beta, binom
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.cli import main
from probwrap.decision import cutoff_interval
from probwrap.decision._cutoff_interval import _binomial_tails, exact_cutoff_range
from probwrap.scale import merge_tallies, tally_scores
from probwrap.scale._bootstrap import tally_cutoff_interval


@pytest.fixture(scope="module")
def held():
    """Breast cancer: a logistic regression on 300 rows, 90 held-out rows scored."""
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    X = X[:, :5]
    idx = np.random.default_rng(0).permutation(y.shape[0])
    model = LogisticRegression(max_iter=5000).fit(X[idx[:300]], y[idx[:300]])
    held = idx[300:390]
    return model, X[held], y[held], model.predict_proba(X[held])[:, 1]


def _weights(n, sigma, seed=3):
    return np.exp(np.random.default_rng(seed).normal(0.0, sigma, n))


def _brute(p, y, w, fp, fn, level=0.95):
    """The range pair by pair, with scipy.stats.beta and direct sums over the rows between."""
    u = np.unique(p)
    lower = np.concatenate([[0.0], u])
    upper = np.concatenate([u, [1.0]])
    acts = [p > lo for lo in lower]
    costs = np.array([np.sum(w * np.where(a, (1 - y) * fp, y * fn)) for a in acts])
    tied = np.flatnonzero(np.isclose(costs, costs.min(), rtol=1e-12, atol=0))
    even = fp / (fp + fn)
    kept = []
    for j, act_j in enumerate(acts):
        dropped = False
        for act_k in acts:
            between = act_j != act_k
            if not between.any():
                continue
            wb = w[between]
            n = wb.sum() ** 2 / (wb @ wb)
            c = n * (wb @ y[between]) / wb.sum()
            if act_j[between].all():  # j acts on them: dearer when their share is low
                pvalue = beta.sf(even, c + 1, n - c) if c < n else 1.0
            else:
                pvalue = beta.cdf(even, c, n - c + 1) if c > 0 else 1.0
            if pvalue < 1.0 - level:
                dropped = True
                break
        if not dropped:
            kept.append(j)
    kept = np.array(kept, dtype=int)
    return (min(lower[kept].min(), lower[tied].min()), max(upper[kept].max(), upper[tied].max()))


def _quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*args, **kw)


def test_tails_are_scipys_binomial_at_whole_counts():
    n = np.array([1.0, 5.0, 12.0, 40.0, 40.0])
    c = np.array([0.0, 2.0, 3.0, 0.0, 17.0])
    for even in (0.09, 0.25, 0.5):
        lower, upper = _binomial_tails(c, n, even)
        np.testing.assert_allclose(lower, binom.cdf(c, n, even), rtol=1e-12)
        np.testing.assert_allclose(upper, binom.sf(c - 1, n, even), rtol=1e-12)


@pytest.mark.parametrize(("n_rows", "fp", "fn"), [(60, 1.0, 1.0), (90, 1.0, 3.0),
                                                   (60, 1.0, 2.0), (40, 1.0, 4.0)])
@pytest.mark.parametrize("sigma", [0.5, 1.2])
def test_row_range_is_the_pairwise_kish_tests(held, n_rows, fp, fn, sigma):
    _, _, y, p = held
    p, y = p[:n_rows], y[:n_rows]
    w = _weights(n_rows, sigma)
    costs = {"fp": fp, "fn": fn}
    lo, hi, note = exact_cutoff_range(p, y, costs, sample_weight=w, score_bounds=(0, 1))
    assert note is None  # NaN with the note "unequal row weights" before
    assert (lo, hi) == pytest.approx(_brute(p, y, w, fp, fn), abs=1e-12)
    ci = _quiet(cutoff_interval, p, y, costs, sample_weight=w, score_bounds=(0, 1),
                n_resamples=20, random_state=0)
    assert (ci.exact_low, ci.exact_high) == (lo, hi)
    # only the ratios count: the same range at any scale
    for factor in (1e-3, 7.3):
        assert exact_cutoff_range(p, y, costs, sample_weight=w * factor,
                                  score_bounds=(0, 1))[:2] == (lo, hi)


def test_unequal_weights_widen_the_range(held):
    # fewer effective rows, less evidence: on 90 rows with fn = 3 fp, [0.091, 0.594] unweighted
    # against [0.030, 0.869] with lognormal(0, 0.5) weights (Kish's size 71 of 90)
    _, _, y, p = held
    costs = {"fp": 1.0, "fn": 3.0}
    plain = exact_cutoff_range(p, y, costs, score_bounds=(0, 1))[:2]
    weighted = exact_cutoff_range(p, y, costs, sample_weight=_weights(90, 0.5),
                                  score_bounds=(0, 1))[:2]
    assert weighted[0] < plain[0] and weighted[1] > plain[1]


@pytest.mark.parametrize("sigma", [0.5, 1.2])
def test_tally_range_equals_the_row_range(held, sigma):
    _, _, y, p = held
    p, y = p[:60], y[:60]
    w = _weights(60, sigma)
    costs = {"fp": 1.0, "fn": 2.0}
    # one distinct probability per bin, so the tally keeps the rows apart
    assert np.unique(np.round(logit(p) / 1e-3)).shape[0] == np.unique(p).shape[0]
    rows = exact_cutoff_range(p, y, costs, sample_weight=w, score_bounds=(0, 1))
    whole = tally_scores(logit(p), y, sample_weight=w, n_replicates=30, random_state=0)
    # tallied in three parts and merged (the Dask and Spark way): the squared weights add up
    # (weights near 1e90 are tallied in other units, with a WeightScaleWarning, and merge)
    parts = _quiet(lambda: merge_tallies([
        tally_scores(logit(p[i::3]), y[i::3], sample_weight=w[i::3] * 1e90, n_replicates=30,
                     random_state=i) for i in range(3)]))
    for tally in (whole, parts):
        ci = _quiet(tally_cutoff_interval, tally, costs)
        assert ci.exact_low == pytest.approx(rows[0], abs=1e-12)
        assert ci.exact_high == pytest.approx(rows[1], abs=1e-12)


def test_dask_policy_path_carries_the_weighted_range(held, tally_path):
    da = pytest.importorskip("dask.array")
    from sklearn.frozen import FrozenEstimator

    from probwrap import CostPolicyWrapper

    model, X, y, p = held
    X, y = X[:60], y[:60]
    w = _weights(60, 0.8)
    costs = {"fp": 1.0, "fn": 2.0}

    def policy():
        return CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned",
                                 random_state=0, n_resamples=30)

    memory = _quiet(lambda: policy().fit(X, y, sample_weight=w).cutoff_interval_)
    expected = exact_cutoff_range(model.predict_proba(X)[:, 1], y, costs, sample_weight=w,
                                  score_bounds=(0, 1))
    assert (memory.exact_low, memory.exact_high) == pytest.approx(expected[:2], abs=1e-12)
    fitted = _quiet(lambda: policy().fit(da.from_array(X, chunks=20), da.from_array(y, chunks=20),
                                         sample_weight=da.from_array(w, chunks=20)))
    ci = _quiet(lambda: fitted.cutoff_interval_)
    assert np.isfinite(ci.exact_low)  # NaN before
    assert ci.exact_low == pytest.approx(memory.exact_low, abs=1e-12)
    assert ci.exact_high == pytest.approx(memory.exact_high, abs=1e-12)


def test_the_tests_keep_their_level_under_unequal_weights():
    """Every row positive with probability ``even`` (the null): the Kish-counted one-sided
    tests reject at most at their 5 % level, lognormal weights of spread 0.5 and 1 on 30 and
    80 rows (20,000 draws each; 5 % + 3 standard errors)."""
    rng = np.random.default_rng(0)
    for even in (0.2, 0.5):
        for r in (30, 80):
            for sigma in (0.5, 1.0):
                w = np.exp(rng.normal(0.0, sigma, r))
                y = (rng.random((20_000, r)) < even).astype(float)
                n = w.sum() ** 2 / (w @ w)
                c = n * (y @ w) / w.sum()
                lower, upper = _binomial_tails(c, np.full_like(c, n), even)
                limit = 0.05 + 3 * np.sqrt(0.05 * 0.95 / 20_000)
                assert (lower < 0.05).mean() <= limit
                assert (upper < 0.05).mean() <= limit


def test_cli_prints_the_weighted_range_and_says_how_it_counts(held, tmp_path, capsys):
    _, _, y, p = held
    p, y = p[:60], y[:60]
    w = _weights(60, 0.8)
    path = tmp_path / "held.csv"
    pd.DataFrame({"p": p, "y": y, "w": w}).to_csv(path, index=False, float_format="%.17g")
    args = ["cutoff", "--scores", str(path), "--score-column", "p", "--label-column", "y",
            "--weight-column", "w", "--cost-fp", "1", "--cost-fn", "2", "--resamples", "0"]
    assert main([*args, "--format", "json"]) == 0
    got = json.loads(capsys.readouterr().out)
    expected = exact_cutoff_range(p, y, {"fp": 1.0, "fn": 2.0}, sample_weight=w,
                                  score_bounds=(0, 1))
    assert got["cutoff_exact_range"] == [expected[0], expected[1]]
    assert got["cutoff_exact_range_note"] is None
    assert got["cutoff_exact_range_counts"] == "kish_effective_rows"
    assert main(args) == 0
    text = capsys.readouterr().out
    assert re.search(r"^  exact-test range\s+\[\S+, \S+\].*count as Kish's effective rows",
                     text, re.M), text
