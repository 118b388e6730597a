"""The report on aggregated counts: whole cells resampled, the unit named, overdispersion noted.

Outside reference: statsmodels' star98 (303 school districts, pupils above / below the median),
statsmodels' GLM Binomial on the districts' (successes, failures) with the forecasts' log-odds
as offset (calibration-in-the-large) or as the one covariate (calibration slope), with the
heteroscedasticity-robust covariance HC0: each district is one observation, so its standard
errors are the group-level (cluster) ones the report's bootstrap of whole districts should give.
"""

from __future__ import annotations

import json
import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy.special import logit
from sklearn.linear_model import LogisticRegression

from probwrap.aggregated import binomial_dispersion, expand_counts
from probwrap.datasets import make_parcels
from probwrap.decision import cutoff_interval
from probwrap.metrics import bootstrap_interval, brier_score, log_loss
from probwrap.report import build_report
from probwrap.report._common import NoteLog
from probwrap.report._fast_metrics import fast_metric_rows

Z95 = 3.919927969080108  # 2 * norm.ppf(0.975)


@pytest.fixture(scope="module")
def star98():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    X_rows, y_rows, w = expand_counts(X, k, n)
    model = LogisticRegression(C=1e6, max_iter=2000).fit(X_rows, y_rows, sample_weight=w)
    district = np.repeat(np.arange(k.shape[0]), 2)[np.column_stack([k, n - k]).ravel() > 0]
    p_group = model.predict_proba(X)[:, 1]
    return dict(k=k, n=n, X_rows=X_rows, y=y_rows, w=w, model=model, district=district,
                p_group=p_group, p_rows=model.predict_proba(X_rows)[:, 1])


def _quiet_report(**kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        content, page = build_report(**kw)
    return content, page, [str(c.message) for c in caught]


@pytest.fixture(scope="module")
def star98_reports(star98):
    s = star98
    common = dict(model=s["model"], X=s["X_rows"], y=s["y"], sample_weight=s["w"],
                  costs={"fp": 1.0, "fn": 1.0}, n_resamples=400, random_state=0)
    by_cells = _quiet_report(**common)
    by_rows = _quiet_report(**common, cells=False)
    return by_cells, by_rows


def _se(content, key):
    row = next(r for r in content.metrics if r.key == key)
    return (row.high - row.low) / Z95


def test_cells_found_from_features_and_standard_errors_match_statsmodels(star98, star98_reports):
    s = star98
    (cells, _, _), (rows, _, _) = star98_reports
    off = logit(s["p_group"])
    counts = np.column_stack([s["k"], s["n"] - s["k"]])
    large = sm.GLM(counts, np.ones((off.shape[0], 1)), family=sm.families.Binomial(),
                   offset=off).fit(cov_type="HC0")
    slope = sm.GLM(counts, sm.add_constant(off), family=sm.families.Binomial()).fit(
        cov_type="HC0")
    assert cells.resampling.kind == "cells" and cells.resampling.source == "features"
    assert cells.resampling.n_cells == 303
    # measured 0.94x (intercept) and 1.03x (slope) with 400 resamples; Monte-Carlo error of a
    # percentile-interval width about 5 %
    assert _se(cells, "intercept") == pytest.approx(large.bse[0], rel=0.15)
    assert _se(cells, "slope") == pytest.approx(slope.bse[1], rel=0.15)
    # resampling the rows breaks each district into its successes or its failures alone:
    # measured 6.0x and 6.1x
    assert rows.resampling.kind == "rows"
    assert _se(rows, "intercept") > 3 * large.bse[0]
    assert _se(rows, "slope") > 3 * slope.bse[1]
    # the cutoff's interval resamples districts too (narrower than by rows)
    assert (cells.chosen_interval[1] - cells.chosen_interval[0]
            < rows.chosen_interval[1] - rows.chosen_interval[0])


def test_dispersion_is_pearsons_and_the_page_says_what_was_resampled(star98, star98_reports):
    s = star98
    (cells, page, caught), (_, rows_page, _) = star98_reports
    off = logit(s["p_group"])
    fit = sm.GLM(np.column_stack([s["k"], s["n"] - s["k"]]), np.ones((off.shape[0], 1)),
                 family=sm.families.Binomial(), offset=off).fit()
    # statsmodels' Pearson chi-square of the (in-sample, intercept ~0) forecasts over the 303
    # districts; the report fits no parameter, so it divides by the number of cells
    assert cells.resampling.dispersion == pytest.approx(fit.pearson_chi2 / 303, rel=1e-3)
    assert cells.resampling.dispersion == pytest.approx(
        binomial_dispersion(s["k"], s["n"], s["p_group"]), rel=1e-9)
    assert cells.resampling.dispersion > 10  # measured 17.8
    assert "whole cells resampled with replacement: 303 cells" in page
    assert "rows resampled with replacement" in rows_page
    assert "whole cells" not in rows_page
    note = [n for n in cells.notes if n.key == "cells"]
    assert len(note) == 1 and "vary 17.8 times as much as binomial" in note[0].message
    assert 'data-note="cells"' in page
    assert any("report, overdispersion" in m for m in caught)


def test_explicit_cells_on_scores_equal_cells_found_from_features(star98, star98_reports):
    s = star98
    (auto, _, _), _ = star98_reports
    codes = auto.resampling.codes
    # the cells found from the features are the districts (one code per district)
    pairs = np.unique(np.column_stack([codes, s["district"]]), axis=0)
    assert pairs.shape[0] == 303 == np.unique(codes).shape[0]
    # the same cells given with the scores: the same numbers, draw for draw
    given, _, _ = _quiet_report(y_true=s["y"], y_prob=s["p_rows"], sample_weight=s["w"],
                                costs={"fp": 1.0, "fn": 1.0}, n_resamples=400, random_state=0,
                                cells=codes)
    assert given.resampling.source == "given"
    for a, b in zip(auto.metrics, given.metrics, strict=True):
        assert (a.value, a.low, a.high) == pytest.approx((b.value, b.low, b.high), abs=1e-12)
    assert given.chosen_interval == pytest.approx(auto.chosen_interval, abs=1e-12)
    # district labels in another order draw other resamples, with the same spread
    by_id, _, _ = _quiet_report(y_true=s["y"], y_prob=s["p_rows"], sample_weight=s["w"],
                                n_resamples=400, random_state=0, cells=s["district"])
    assert _se(by_id, "intercept") == pytest.approx(_se(auto, "intercept"), rel=0.2)


def test_scores_alone_that_look_like_counts_get_a_note_not_a_silent_change(star98):
    s = star98
    content, _, caught = _quiet_report(y_true=s["y"], y_prob=s["p_rows"],
                                       sample_weight=s["w"], n_resamples=20)
    assert content.resampling.kind == "rows"
    note = [n for n in content.notes if n.key == "cells"]
    assert len(note) == 1 and "pass their group as `cells`" in note[0].message
    assert any("resampling unit" in m for m in caught)


def _numbers(content):
    """Every number of the metrics, cutoff interval, prevalence and rules, as floats."""
    out = [v for r in content.metrics for v in (r.value, r.low, r.high)]
    out += [*content.chosen_interval, content.target_prevalence, *content.target_interval,
            content.shift_statistic]
    out += [r.mean_cost for r in content.rules]
    return np.asarray(out, dtype=float)


def test_unweighted_unaggregated_data_give_the_same_numbers():
    train = make_parcels(1500, random_state=0)
    test = make_parcels(800, random_state=1)
    winter = make_parcels(600, season="winter", random_state=2)
    model = LogisticRegression(max_iter=1000).fit(train.data, train.target)
    kw = dict(model=model, X=test.data, y=test.target, costs={"fp": 3.0, "fn": 40.0},
              X_unlabelled=winter.data, n_resamples=40, random_state=3)
    auto, page, _ = _quiet_report(**kw)
    rows, _, _ = _quiet_report(**kw, cells=False)
    # one cell per row is the row bootstrap, draw for draw
    single, _, _ = _quiet_report(**kw, cells=np.arange(test.target.shape[0]))
    assert auto.resampling.kind == "rows" and not [n for n in auto.notes if n.key == "cells"]
    np.testing.assert_array_equal(_numbers(auto), _numbers(rows))
    # ... except the prevalence's interval and shift statistic: since the report passes its
    # cells to the PriorEstimator, singleton cells give the estimator's two-sample test with
    # separate variances (docs/evidence/prior_shift_log.md, "Counts (k of n)") instead of the pooled one
    prevalence = slice(-len(auto.rules) - 4, -len(auto.rules))  # estimate, interval, statistic
    keep = np.ones(_numbers(auto).shape[0], bool)
    keep[prevalence.start + 1:prevalence.stop] = False
    np.testing.assert_allclose(_numbers(auto)[keep], _numbers(single)[keep], rtol=1e-12,
                               atol=1e-12)
    np.testing.assert_allclose(_numbers(auto)[~keep], _numbers(single)[~keep], rtol=0.05)
    assert single.prevalence_cells == test.target.shape[0] and auto.prevalence_cells is None
    assert "(rows resampled with replacement)" in page
    # weighted rows with distinct features are no cells either
    w = np.random.default_rng(0).uniform(0.5, 2.0, size=test.target.shape[0])
    weighted, _, _ = _quiet_report(**kw, sample_weight=w)
    weighted_rows, _, _ = _quiet_report(**kw, sample_weight=w, cells=False)
    assert weighted.resampling.kind == "rows"
    np.testing.assert_array_equal(_numbers(weighted), _numbers(weighted_rows))


def test_bad_cells_are_refused_by_name():
    rng = np.random.default_rng(0)
    p = rng.uniform(0.05, 0.95, size=60)
    y = (rng.uniform(size=60) < p).astype(int)
    with pytest.raises(ValueError, match="`cells` must be 1-d with one cell label per"):
        build_report(y_true=y, y_prob=p, cells=np.arange(59), n_resamples=5)
    with pytest.raises(ValueError, match="`cells` contains NaN"):
        build_report(y_true=y, y_prob=p, cells=np.r_[np.nan, np.arange(59.0)], n_resamples=5)
    with pytest.raises(ValueError, match="at least two cells"):
        build_report(y_true=y, y_prob=p, cells=np.zeros(60), n_resamples=5)
    with pytest.raises(ValueError, match="`cells` must be the cell of every"):
        build_report(y_true=y, y_prob=p, cells=True, n_resamples=5)


def test_fractional_weights_give_no_dispersion_and_say_why():
    rng = np.random.default_rng(1)
    p = np.repeat(rng.uniform(0.1, 0.9, size=40), 2)
    y = np.tile([1, 0], 40)
    w = rng.uniform(0.5, 3.0, size=80)
    content, _, _ = _quiet_report(y_true=y, y_prob=p, sample_weight=w,
                                  cells=np.repeat(np.arange(40), 2), n_resamples=10)
    assert content.resampling.kind == "cells" and content.resampling.dispersion is None
    assert "not whole numbers" in content.resampling.dispersion_skipped


def test_multiclass_report_resamples_cells_without_a_binomial_dispersion():
    rng = np.random.default_rng(2)
    P = rng.dirichlet([2, 2, 2], size=50)
    rows = np.repeat(np.arange(50), 3)
    y = np.tile([0, 1, 2], 50)
    w = rng.integers(1, 30, size=150).astype(float)
    content, page, _ = _quiet_report(y_true=y, y_prob=P[rows], sample_weight=w, cells=rows,
                                     n_resamples=20)
    assert content.resampling.kind == "cells" and content.resampling.n_cells == 50
    assert content.resampling.dispersion is None
    assert "whole cells resampled with replacement: 50 cells" in page


def test_fast_path_resamples_cells_as_the_library_bootstrap(star98):
    s = star98
    labels = {"brier": "b", "log_loss": "l", "ece": "e", "slope": "s", "intercept": "i"}
    rows = fast_metric_rows(s["y"], s["p_rows"], s["w"], 10, 60, 0.95, 7, NoteLog(), labels,
                            groups=s["district"])
    for key, fn in (("brier", brier_score), ("log_loss", log_loss)):
        ref = bootstrap_interval(fn, s["y"], s["p_rows"], sample_weight=s["w"], n_resamples=60,
                                 random_state=7, groups=s["district"])
        row = next(r for r in rows if r.key == key)
        assert (row.low, row.high) == pytest.approx(
            (ref.confidence_interval.low, ref.confidence_interval.high), rel=1e-9)


def test_cutoff_interval_groups(star98):
    s = star98
    costs = {"fp": 1.0, "fn": 1.0}
    kw = dict(sample_weight=s["w"], score_bounds=(0.0, 1.0), n_resamples=100, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = cutoff_interval(s["p_rows"], s["y"], costs, **kw)
        single = cutoff_interval(s["p_rows"], s["y"], costs, **kw,
                                 groups=np.arange(s["y"].shape[0]))
        grouped = cutoff_interval(s["p_rows"], s["y"], costs, **kw, groups=s["district"])
    np.testing.assert_array_equal(plain.bootstrap_cutoffs, single.bootstrap_cutoffs)
    assert np.std(grouped.bootstrap_cutoffs) < np.std(plain.bootstrap_cutoffs)
    with pytest.raises(ValueError, match="`groups` must be 1-d with one group per row"):
        cutoff_interval(s["p_rows"], s["y"], costs, groups=[0, 1])


def test_cli_cell_column(star98, tmp_path):
    s = star98
    path = tmp_path / "districts.csv"
    pd.DataFrame({"score": s["p_rows"], "label": s["y"], "w": s["w"],
                  "district": s["district"]}).to_csv(path, index=False)
    out = subprocess.run(
        [sys.executable, "-m", "probwrap", "report", "--scores", str(path), "--score-column",
         "score", "--label-column", "label", "--weight-column", "w", "--cell-column",
         "district", "--resamples", "30", "--out", str(tmp_path / "r.html"), "--format",
         "json"], capture_output=True, text=True, check=True)
    summary = json.loads(out.stdout)
    assert summary["resampled"]["n_cells"] == 303
    assert summary["resampled"]["dispersion"] == pytest.approx(
        binomial_dispersion(s["k"], s["n"], s["p_group"]), rel=1e-9)
    assert "overdispersion" in out.stderr
    # weighted, the scores rank the classes (the unweighted AUC of expanded counts is 0.5)
    assert "BELOW" not in out.stderr
    bad = subprocess.run(
        [sys.executable, "-m", "probwrap", "report", "--scores", str(path), "--score-column",
         "score", "--label-column", "label", "--cell-column", "route", "--out",
         str(tmp_path / "r2.html")], capture_output=True, text=True)
    assert bad.returncode != 0 and "no column 'route' (--cell-column)" in bad.stderr


@pytest.mark.parametrize("verb", [["cutoff", "--cost-fp", "1", "--cost-fn", "3"],
                                  ["calibrate", "fit"]])
def test_cli_ranking_check_reads_the_weights(star98, tmp_path, verb):
    # Expanded counts put every score once with each label, so their unweighted ROC AUC is 0.5
    # (a hair below by rounding) and `cutoff` / `calibrate fit` said the scores ranked the
    # classes BELOW one another; weighted (scikit-learn's roc_auc_score with sample_weight)
    # the fitted star98 model ranks them well.
    from sklearn.metrics import roc_auc_score

    s = star98
    assert roc_auc_score(s["y"], s["p_rows"], sample_weight=s["w"]) > 0.6
    path = tmp_path / "districts.csv"
    pd.DataFrame({"score": s["p_rows"], "label": s["y"], "w": s["w"]}).to_csv(path, index=False)
    extra = ["--out", str(tmp_path / "map.json")] if verb[0] == "calibrate" else []
    out = subprocess.run(
        [sys.executable, "-m", "probwrap", *verb, "--scores", str(path), "--score-column",
         "score", "--label-column", "label", "--weight-column", "w", *extra],
        capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert "BELOW" not in out.stderr
    flipped = tmp_path / "flipped.csv"
    pd.DataFrame({"score": 1 - s["p_rows"], "label": s["y"], "w": s["w"]}).to_csv(
        flipped, index=False)
    out = subprocess.run(
        [sys.executable, "-m", "probwrap", *verb, "--scores", str(flipped), "--score-column",
         "score", "--label-column", "label", "--weight-column", "w", *extra],
        capture_output=True, text=True)
    assert "BELOW" in out.stderr
