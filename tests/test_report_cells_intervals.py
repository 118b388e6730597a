"""The report's per-bin reliability intervals on aggregated counts (cells): quasi-binomial.

Outside references: statsmodels' star98 (303 school districts, pupils above / below the
median) and statsmodels' GLM Binomial on the districts' proportions with the trials as
``var_weights``, one indicator per reliability bin, ``scale="X2"``: the quasi-binomial
(McCullagh & Nelder 1989, section 4.5) standard error of each bin's observed frequency,
``sqrt(phi f (1 - f) / N)`` by the delta method. statsmodels' ``proportion_confint(method=
"wilson")`` for the Wilson (1927) interval of a non-integer count.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.linear_model import LogisticRegression
from statsmodels.stats.proportion import proportion_confint

from probwrap.aggregated import expand_counts
from probwrap.datasets import make_parcels
from probwrap.metrics import reliability_table
from probwrap.plot import ReliabilityDiagram
from probwrap.plot._intervals import bin_counts, wilson_interval
from probwrap.report import build_report
from probwrap.report._builtin_figures import builtin_figures, reliability_svg
from probwrap.report._cells import (
    ResamplingUnit,
    bin_dispersion,
    bin_intervals,
    reliability_diagram,
)

Z95 = 3.919927969080108  # 2 * norm.ppf(0.975)


def _quiet(**kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return build_report(**kw)


@pytest.fixture(scope="module")
def star98():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    X_rows, y_rows, w = expand_counts(X, k, n)
    model = LogisticRegression(C=1e6, max_iter=2000).fit(X_rows, y_rows, sample_weight=w)
    content, page = _quiet(model=model, X=X_rows, y=y_rows, sample_weight=w, n_resamples=20,
                           random_state=0)
    return dict(k=k, n=n, w=w, p_group=model.predict_proba(X)[:, 1], content=content,
                page=page)


def _report_bins(content):
    table = reliability_table(content.y_true, content.y_prob, n_bins=content.n_bins,
                              sample_weight=content.sample_weight, labels=[0.0, 1.0])
    return table, bin_counts(table.weight, content.sample_weight)


def test_bin_intervals_match_statsmodels_quasi_binomial_on_star98(star98):
    s = star98
    c = s["content"]
    phi = bin_dispersion(c.resampling)
    assert phi == pytest.approx(c.resampling.dispersion) and phi > 10  # measured 17.8
    table, trials = _report_bins(c)
    low, high = bin_intervals(table.observed_frequency, trials, phi, c.confidence_level)
    # the same bins on the districts: every district's two rows share one forecast
    edges = np.linspace(0.0, 1.0, c.n_bins + 1)
    b = np.clip(np.searchsorted(edges[1:-1], s["p_group"], side="right"), 0, c.n_bins - 1)
    used = np.unique(b)
    D = (b[:, None] == used[None, :]).astype(float)
    fit = sm.GLM(s["k"] / s["n"], D, family=sm.families.Binomial(),
                 var_weights=s["n"]).fit(scale="X2")
    f = 1.0 / (1.0 + np.exp(-fit.params))
    np.testing.assert_allclose(table.observed_frequency, f, rtol=1e-6)
    np.testing.assert_allclose(trials, D.T @ s["n"], rtol=1e-12)
    se_quasi = fit.bse * f * (1.0 - f)
    # measured 0.997-0.998 in all 8 bins (Wilson vs Wald, X2 over 295 vs 303 degrees of
    # freedom, and the report's phi against the model's forecasts rather than the bin means)
    np.testing.assert_allclose((high - low) / Z95, se_quasi, rtol=0.03)
    # before: the binomial Wilson interval, sqrt(17.8) = 4.2 times narrower
    low0, high0 = wilson_interval(table.observed_frequency * trials, trials, c.confidence_level)
    np.testing.assert_allclose((high - low) / (high0 - low0), np.sqrt(phi), rtol=0.05)


def test_bin_interval_is_wilsons_on_the_trials_over_phi_as_statsmodels_computes_it():
    low, high = bin_intervals([0.3, 0.05], [400.0, 90.0], 7.5, 0.9)
    for i, (freq, n) in enumerate([(0.3, 400.0), (0.05, 90.0)]):
        ref = proportion_confint(freq * n / 7.5, n / 7.5, alpha=0.1, method="wilson")
        assert (low[i], high[i]) == pytest.approx(ref, rel=1e-10)


def test_the_drawn_diagrams_carry_the_widened_intervals(star98):
    s = star98
    c = s["content"]
    phi = bin_dispersion(c.resampling)
    table, trials = _report_bins(c)
    low, high = bin_intervals(table.observed_frequency, trials, phi, c.confidence_level)
    rel = reliability_diagram(c)
    np.testing.assert_array_equal(rel.band_low, low)
    np.testing.assert_array_equal(rel.band_high, high)
    assert "widened for overdispersion (trials / 17.8)" in rel.band_artist_.get_label()
    # the built-in renderer (no matplotlib) draws the same numbers
    svg = builtin_figures(c)["reliability"]
    assert svg == reliability_svg(c.y_true, c.y_prob, n_bins=c.n_bins,
                                  sample_weight=c.sample_weight, key="rel", dispersion=phi)
    assert svg != reliability_svg(c.y_true, c.y_prob, n_bins=c.n_bins,
                                  sample_weight=c.sample_weight, key="rel")
    assert "widened for overdispersion" in svg
    assert ("divided by the cells&#x27; Pearson dispersion 17.8 (quasi-binomial, McCullagh "
            "&amp; Nelder 1989)") in s["page"]
    note = next(n for n in c.notes if n.key == "cells")
    assert "Wilson intervals are widened by its square root" in note.message


def test_rows_and_undispersed_cells_keep_the_binomial_intervals_bit_for_bit():
    train = make_parcels(1500, random_state=0)
    test = make_parcels(700, random_state=1)
    model = LogisticRegression(max_iter=1000).fit(train.data, train.target)
    c, page = _quiet(model=model, X=test.data, y=test.target, n_resamples=10, random_state=0)
    assert c.resampling.kind == "rows" and bin_dispersion(c.resampling) == 1.0
    before = ReliabilityDiagram.from_predictions(
        c.y_true, c.y_prob, n_bins=c.n_bins, confidence_level=c.confidence_level,
        pos_label=1.0)
    now = reliability_diagram(c)
    np.testing.assert_array_equal(now.band_low, before.band_low)
    np.testing.assert_array_equal(now.band_high, before.band_high)
    assert now.band_artist_.get_label() == "Wilson 95% interval"
    assert builtin_figures(c)["reliability"] == reliability_svg(
        c.y_true, c.y_prob, n_bins=c.n_bins, key="rel")
    assert "widened" not in page and "Pearson dispersion" not in page
    # a dispersion below 1 does not narrow them
    cells = ResamplingUnit("cells", "given", np.arange(4), 4, dispersion=0.4)
    assert bin_dispersion(cells) == 1.0
    np.testing.assert_array_equal(bin_intervals([0.25], [20.0], 1.0, 0.95)[0],
                                  wilson_interval(5.0, 20.0)[0])


def test_binomial_cells_are_barely_widened():
    # k of n drawn binomially with the model's own probabilities: phi near 1, intervals as
    # before within a few per cent (common practice: phi ~ 1 reads as binomial)
    rng = np.random.default_rng(5)
    m = 250
    x = rng.normal(size=(m, 2))
    p = 1.0 / (1.0 + np.exp(-(x @ [1.0, -0.7])))
    n = rng.integers(5, 60, size=m).astype(float)
    k = rng.binomial(n.astype(int), p).astype(float)
    X_rows, y_rows, w = expand_counts(x, k, n)
    model = LogisticRegression(C=1e6).fit(X_rows, y_rows, sample_weight=w)
    c, _ = _quiet(model=model, X=X_rows, y=y_rows, sample_weight=w, n_resamples=10,
                  random_state=0)
    assert c.resampling.kind == "cells"
    phi = bin_dispersion(c.resampling)
    assert 1.0 <= phi < 1.3
