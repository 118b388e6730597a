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
from probwrap.metrics import calibration_by_group, reliability_table
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
from probwrap.report._general_groups import multiclass_by_group

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
    # against the cluster-robust error of each bin (HC0 on the districts): one phi is an
    # average over the bins; measured 0.55-1.74x (binomial: 0.13-0.41x, always too narrow)
    robust = sm.GLM(np.column_stack([s["k"], s["n"] - s["k"]]), D,
                    family=sm.families.Binomial()).fit(cov_type="HC0")
    se_robust = robust.bse * f * (1.0 - f)
    ratio = (high - low) / Z95 / se_robust
    assert np.all((ratio > 0.5) & (ratio < 2.0))
    assert np.all((high0 - low0) / Z95 / se_robust < 0.45)


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


# -- "By group": whole cells resampled within each group ---------------------------------------


@pytest.fixture(scope="module")
def star98_groups():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    X_rows, y, w = expand_counts(X, k, n)
    model = LogisticRegression(C=1e6, max_iter=2000).fit(X_rows, y, sample_weight=w)
    p = model.predict_proba(X_rows)[:, 1]
    district = np.repeat(np.arange(k.shape[0]), 2)[np.column_stack([k, n - k]).ravel() > 0]
    # three groups of about 101 districts: tertiles of the fourth covariate
    tert = np.digitize(X[:, 3], np.quantile(X[:, 3], [1 / 3, 2 / 3]))
    g = np.array(["low", "mid", "high"])[tert][district]
    kw = dict(cutoff=0.5, sample_weight=w, n_resamples=400, random_state=0)
    rows = calibration_by_group(y, p, g, **kw)
    cells = calibration_by_group(y, p, g, **kw, cells=district)
    return dict(y=y, p=p, w=w, g=g, district=district, model=model, X_rows=X_rows,
                rows=rows, cells=cells)


def _cluster_se(s, name):
    """statsmodels' cluster-robust (districts, no small-sample factor) SE of a group's Brier."""
    sel = s["g"] == name
    e = (s["y"][sel] - s["p"][sel]) ** 2
    fit = sm.WLS(e, np.ones((int(sel.sum()), 1)), weights=s["w"][sel]).fit(
        cov_type="cluster", cov_kwds={"groups": s["district"][sel], "use_correction": False})
    return float(fit.params[0]), float(fit.bse[0])


def test_group_intervals_resample_districts_as_statsmodels_cluster_errors(star98_groups):
    s = star98_groups
    assert s["cells"].resampled == "cells" and s["rows"].resampled == "rows"
    for name in ("low", "mid", "high"):
        brier, se = _cluster_se(s, name)
        c = next(x for x in s["cells"].groups if x.group == name)
        r = next(x for x in s["rows"].groups if x.group == name)
        assert c.brier == pytest.approx(brier, rel=1e-9)
        # measured 0.90x, 1.08x, 0.95x (400 resamples; Monte-Carlo error about 5 %)
        assert (c.brier_interval[1] - c.brier_interval[0]) / Z95 == pytest.approx(se, rel=0.2)
        # rows break each district into its successes or failures: measured 2.7x-8.6x
        assert (r.brier_interval[1] - r.brier_interval[0]) / Z95 > 2 * se
    # the gap in the Brier score: two independent groups, so the cluster SEs add in squares
    gap = next(x for x in s["cells"].gaps if x.metric == "brier")
    se_gap = np.hypot(_cluster_se(s, gap.highest)[1], _cluster_se(s, gap.lowest)[1])
    assert (gap.interval[1] - gap.interval[0]) / Z95 == pytest.approx(se_gap, rel=0.2)
    rows_gap = next(x for x in s["rows"].gaps if x.metric == "brier")
    assert (rows_gap.interval[1] - rows_gap.interval[0]) / Z95 > 2 * se_gap


def test_one_cell_per_row_is_the_row_bootstrap_draw_for_draw(star98_groups):
    s = star98_groups
    kw = dict(cutoff=0.5, sample_weight=s["w"], n_resamples=30, random_state=4)
    rows = calibration_by_group(s["y"], s["p"], s["g"], **kw)
    single = calibration_by_group(s["y"], s["p"], s["g"], **kw,
                                  cells=np.arange(s["y"].shape[0]))
    for a, b in zip(rows.groups, single.groups, strict=True):
        np.testing.assert_allclose(a.brier_interval, b.brier_interval, rtol=1e-12)
        np.testing.assert_allclose(a.log_loss_interval, b.log_loss_interval, rtol=1e-12)
    for a, b in zip(rows.gaps, single.gaps, strict=True):
        np.testing.assert_allclose(a.interval, b.interval, rtol=1e-12, equal_nan=True)
    with pytest.raises(ValueError, match="`cells` must be 1-d with one cell label per row"):
        calibration_by_group(s["y"], s["p"], s["g"], cells=np.arange(5))
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        calibration_by_group(s["y"], s["p"], s["g"],
                             cells=np.r_[np.nan, np.arange(s["y"].shape[0] - 1.0)])


def test_report_by_group_resamples_the_report_cells(star98_groups):
    s = star98_groups
    content, page = _quiet(model=s["model"], X=s["X_rows"], y=s["y"], sample_weight=s["w"],
                           groups=s["g"], n_resamples=40, random_state=0)
    assert content.resampling.kind == "cells"
    assert content.group_checks.resampled == "cells"
    assert "whole cells resampled within the group" in page
    assert "whole cells resampled within each group" in page
    rows, rows_page = _quiet(model=s["model"], X=s["X_rows"], y=s["y"], sample_weight=s["w"],
                             groups=s["g"], n_resamples=40, random_state=0, cells=False)
    assert rows.group_checks.resampled == "rows"
    assert "rows resampled within the group" in rows_page
    for name in ("low", "mid", "high"):
        c = next(x for x in content.group_checks.groups if x.group == name)
        r = next(x for x in rows.group_checks.groups if x.group == name)
        assert (c.brier_interval[1] - c.brier_interval[0]
                < 0.6 * (r.brier_interval[1] - r.brier_interval[0]))


def test_multiclass_by_group_resamples_cells_as_statsmodels_cluster_errors():
    rng = np.random.default_rng(3)
    m = 300
    P = rng.dirichlet([3, 3, 3], size=m)
    region = rng.choice(["north", "south"], size=m)
    # three rows per cell (one per class) with counts of 40 trials whose class shares vary
    # around the forecasts more than multinomial ones (Dirichlet-multinomial)
    rows = np.repeat(np.arange(m), 3)
    y = np.tile([0, 1, 2], m)
    w = np.concatenate([rng.multinomial(40, rng.dirichlet(P[i] * 4.0)) for i in range(m)])
    w = w.astype(float)
    keep = w > 0
    rows, y, w, g = rows[keep], y[keep], w[keep], region[rows][keep]
    proba = P[rows]
    kw = dict(sample_weight=w, n_resamples=400, random_state=7, min_rows=10, min_events=1)
    by_cells = multiclass_by_group(y, proba, g, cells=rows, **kw)
    by_rows = multiclass_by_group(y, proba, g, **kw)
    assert by_cells.resampled == "cells" and by_rows.resampled == "rows"
    onehot = np.eye(3)[y]
    for name in ("north", "south"):
        sel = g == name
        e = ((proba[sel] - onehot[sel]) ** 2).sum(axis=1)
        fit = sm.WLS(e, np.ones((int(sel.sum()), 1)), weights=w[sel]).fit(
            cov_type="cluster", cov_kwds={"groups": rows[sel], "use_correction": False})
        c = next(x for x in by_cells.groups if x.group == name)
        r = next(x for x in by_rows.groups if x.group == name)
        assert c.brier == pytest.approx(fit.params[0], rel=1e-9)
        se_cells = (c.brier_interval[1] - c.brier_interval[0]) / Z95
        assert se_cells == pytest.approx(fit.bse[0], rel=0.2)
        # measured 1.05x / 0.97x (cells) and 1.31x / 1.38x (rows) for north / south
        assert (r.brier_interval[1] - r.brier_interval[0]) / Z95 > 1.15 * fit.bse[0]
    content, page = _quiet(y_true=y, y_prob=proba, sample_weight=w, groups=g, cells=rows,
                           n_resamples=20, random_state=0)
    assert content.group_checks.resampled == "cells"
    assert "whole cells resampled within the group" in page


def test_overdispersion_note_says_how_the_prevalence_part_counts_the_labelled_rows(star98):
    # star98's expanded rows carry whole-number counts of pupils: a count table, which the
    # shift test and the prevalence interval read as its cases since session 27
    # (docs/weights.md), so they count the 267,611 pupils as independent, not the 303
    # districts. Against statsmodels' cluster-robust errors (districts) that is far too narrow
    # for both the labelled prevalence and the labelled mean score; the note says so and names
    # the remedy. Scaled weights keep Kish's reading, and the note then says that instead.
    from probwrap.shift import PriorEstimator

    s = star98
    c = s["content"]
    w = s["w"]
    trials = w.sum()
    note = next(n for n in c.notes if n.key == "cells")
    assert "count the labelled rows as 267611 independent cases (a count table's whole-number " \
           "weights, for 303 cells)" in note.message
    assert "pass the cells as `cells`" in note.message
    y, p = c.y_true, c.y_prob
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        est = PriorEstimator(n_resamples=2, random_state=0).fit(
            np.column_stack([1 - p, p]), y.astype(int), w)
        scaled = PriorEstimator(n_resamples=2, random_state=0).fit(
            np.column_stack([1 - p, p]), y.astype(int), w / trials)
    assert est.n_source_effective_ == pytest.approx(trials, rel=1e-12)  # 267,611 pupils
    kish = trials ** 2 / np.dot(w, w)
    assert scaled.n_source_effective_ == pytest.approx(kish, rel=1e-9)  # measured 59.6
    district = np.repeat(np.arange(s["k"].shape[0]), 2)[
        np.column_stack([s["k"], s["n"] - s["k"]]).ravel() > 0]

    def cluster_se(v):
        return sm.WLS(v, np.ones((v.shape[0], 1)), weights=w).fit(
            cov_type="cluster", cov_kwds={"groups": district, "use_correction": False}).bse[0]

    f = np.average(y, weights=w)
    # read as cases, both labelled parts are several times too narrow against the districts
    assert np.sqrt(f * (1 - f) / trials) < 0.2 * cluster_se(y)
    assert np.sqrt(np.cov(p, aweights=w) / trials) < 0.2 * cluster_se(p)
