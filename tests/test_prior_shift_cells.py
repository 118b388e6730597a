"""The shift test and the prevalence interval with outcomes aggregated as counts (cells).

Outside references: statsmodels' bundled star98 (303 school districts, pupils above / below the
median in maths) and china_smoking (8 cities, smokers / non-smokers with / without lung cancer);
statsmodels' ``WLS(...).fit(cov_type="cluster", use_correction=False)`` for the cluster-robust
(Liang & Zeger 1986) variance of a weighted mean, times ``G / (G - 1)``, and
``GLM(Binomial).fit(cov_type="HC0")`` on the districts' counts for the cluster-robust error of a
pass rate (delta method ``p (1 - p) se(logit)``).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.stats import t as t_dist

from probwrap import PriorShiftWrapper
from probwrap.aggregated import expand_counts
from probwrap.metrics import calibration_by_group
from probwrap.shift import PriorEstimator
from probwrap.shift._cells import cell_mean_cov, check_cells
from probwrap.shift._shift_tests import _mean_cov, _score_rows


def _statsmodels_cluster_var(v, w, groups):
    fit = sm.WLS(v, np.ones(v.shape[0]), weights=w).fit(
        cov_type="cluster", cov_kwds={"groups": groups, "use_correction": False})
    g = np.unique(groups).shape[0]
    return float(fit.bse[0] ** 2) * g / (g - 1)


@pytest.fixture(scope="module")
def star98():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    Xr, yr, w = expand_counts(X, k, n)
    assert np.allclose(Xr[::2], X) and np.allclose(Xr[1::2], X)  # a district's two rows
    cell = np.repeat(np.arange(k.shape[0]), 2)
    rng = np.random.default_rng(0)
    labelled = np.zeros(k.shape[0], bool)
    labelled[rng.permutation(k.shape[0])[: k.shape[0] // 2]] = True
    return dict(k=k, n=n, X=X, Xr=Xr, y=yr, w=w, cell=cell, labelled=labelled)


def _near_exact(y, e=0.02):
    p1 = np.where(y == 1, 1.0 - e, e)
    return np.column_stack([1.0 - p1, p1])


def test_cell_mean_cov_is_statsmodels_cluster_robust(star98):
    s = star98
    rng = np.random.default_rng(1)
    u = rng.normal(size=s["y"].shape[0]) + s["y"]
    mean, cov, g = cell_mean_cov(u[:, None], s["w"], s["cell"])
    assert g == 303
    assert mean[0] == pytest.approx(np.average(u, weights=s["w"]), rel=1e-12)
    assert cov[0, 0] / (g - 1) == pytest.approx(
        _statsmodels_cluster_var(u, s["w"], s["cell"]), rel=1e-9)
    # every row its own cell, unit weights: the plain cov / (n - 1) of the shift test
    v = rng.normal(size=(50, 2))
    m1, c1, n1 = _mean_cov(v, np.ones(50))
    m2, c2, n2 = cell_mean_cov(v, np.ones(50), np.arange(50))
    np.testing.assert_allclose(m1, m2, rtol=1e-12)
    np.testing.assert_allclose(c1 / (n1 - 1), c2 / (n2 - 1), rtol=1e-10)


def test_labelled_mean_score_of_the_shift_test_is_clustered_on_star98(star98):
    s = star98
    post = _near_exact(s["y"], 0.3)
    est = PriorEstimator(calibration=None, n_resamples=0).fit(post, s["y"], s["w"],
                                                              cells=s["cell"])
    mean, parts = est._source_score
    (v, g), = parts
    u = _score_rows(post, est.source_prior_)[:, 0]
    assert g == 303
    assert v[0, 0] == pytest.approx(_statsmodels_cluster_var(u, s["w"], s["cell"]), rel=1e-9)
    # without cells the pupils' counts are a count table, read as 267,611 independent pupils
    # (since session 27, as the pupils one row each; before, Kish's 59.6 rows, 2.40 times the
    # districts' standard error): the districts' clustering is what the cells add, a standard
    # error 28 times that of independent pupils here (measured 1 / 0.0355)
    plain = PriorEstimator(calibration=None, n_resamples=0).fit(post, s["y"], s["w"])
    (v0, n0), = plain._source_score[1]
    assert n0 == s["w"].sum() == 267611
    assert np.sqrt(v0[0, 0] / v[0, 0]) == pytest.approx(0.0355, abs=0.001)


def test_labelled_mean_score_is_clustered_on_china_smoking():
    d = sm.datasets.china_smoking.load_pandas().data
    counts = d.to_numpy(float)  # per city: smoker cancer yes/no, non-smoker cancer yes/no
    rows, y, w, city = [], [], [], []
    for c in range(counts.shape[0]):
        for smoker, (yes, no) in ((1.0, counts[c, :2]), (0.0, counts[c, 2:])):
            rows += [smoker, smoker]
            y += [1, 0]
            w += [yes, no]
            city += [c, c]
    smoker, y, w, city = map(np.asarray, (rows, y, w, city))
    p1 = np.where(smoker == 1.0, 0.55, 0.40)  # a model: cancer more likely among smokers
    post = np.column_stack([1.0 - p1, p1])
    est = PriorEstimator(calibration=None, n_resamples=0).fit(post, y, w, cells=city)
    (v, g), = est._source_score[1]
    u = _score_rows(post, est.source_prior_)[:, 0]
    assert g == 8
    assert v[0, 0] == pytest.approx(_statsmodels_cluster_var(u, w, city), rel=1e-9)


def test_prevalence_interval_matches_statsmodels_cluster_error_on_star98(star98):
    """Near-exact posteriors (0.98 for a pupil above the median, 0.02 below): the unlabelled
    share is then read almost off the labels, and the score interval's half-width is the
    t quantile times the districts' cluster-robust error of the pass rate (statsmodels GLM
    Binomial on the unlabelled districts' counts, HC0, times sqrt(G / (G - 1)))."""
    s = star98
    lab = s["labelled"][s["cell"]]
    post = _near_exact(s["y"])
    ku, nu = s["k"][~s["labelled"]], s["n"][~s["labelled"]]
    glm = sm.GLM(np.column_stack([ku, nu - ku]), np.ones((ku.shape[0], 1)),
                 family=sm.families.Binomial()).fit(cov_type="HC0")
    pu = ku.sum() / nu.sum()
    g = ku.shape[0]
    se = pu * (1 - pu) * float(glm.bse[0]) * np.sqrt(g / (g - 1))
    half = {}
    for use in (False, True):
        est = PriorEstimator(random_state=0, prior_strength=0).fit(
            post[lab], s["y"][lab], s["w"][lab], cells=s["cell"][lab] if use else None)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = est.estimate(post[~lab], s["w"][~lab], cells=s["cell"][~lab] if use else None)
        assert res.prior[1] == pytest.approx(pu, abs=0.005)
        half[use] = (res.interval[1, 1] - res.interval[1, 0]) / 2
    crit = t_dist.ppf(0.975, g - 1)
    assert half[True] / (crit * se) == pytest.approx(1.0, abs=0.06)  # measured 1.01
    # without cells the counts are read as independent pupils (a count table's cases, since
    # session 27): far narrower than the districts' error (measured 0.075; Kish's count of
    # the rows, before, gave 2.26 times it) -- pass the cells for clustered counts
    assert half[False] / (crit * se) < 0.1
    # the score interval itself, before the floor (which here nearly coincides with it)
    from probwrap.shift import score_interval

    est = PriorEstimator(prior_strength=0).fit(post[lab], s["y"][lab], s["w"][lab],
                                               cells=s["cell"][lab])
    (lo, hi), ok = score_interval(
        est.calibrate(post[~lab]), est.calibrate(post[lab]), s["y"][lab], est.source_prior_,
        sample_weight=s["w"][~lab], source_sample_weight=s["w"][lab], cells=s["cell"][~lab],
        source_cells=s["cell"][lab])
    assert ok and (hi - lo) / 2 / (crit * se) == pytest.approx(1.0, abs=0.03)  # measured 1.000


def test_bootstrap_draws_whole_cells(star98):
    s = star98
    lab = s["labelled"][s["cell"]]
    post = _near_exact(s["y"])
    ku, nu = s["k"][~s["labelled"]], s["n"][~s["labelled"]]
    glm = sm.GLM(np.column_stack([ku, nu - ku]), np.ones((ku.shape[0], 1)),
                 family=sm.families.Binomial()).fit(cov_type="HC0")
    pu = ku.sum() / nu.sum()
    se = pu * (1 - pu) * float(glm.bse[0])
    est = PriorEstimator(random_state=0, prior_strength=0, interval="percentile",
                         n_resamples=400).fit(post[lab], s["y"][lab], s["w"][lab],
                                              cells=s["cell"][lab])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(post[~lab], s["w"][~lab], cells=s["cell"][~lab])
    half = (res.interval[1, 1] - res.interval[1, 0]) / 2
    assert half / (1.96 * se) == pytest.approx(1.0, abs=0.2)


def test_unlabelled_cells_only_and_bad_cells(star98):
    s = star98
    est = PriorEstimator(n_resamples=0).fit(_near_exact(s["y"]), s["y"], s["w"])
    with pytest.raises(ValueError, match="`cells` must be 1-d with one cell label per row"):
        est.estimate(_near_exact(s["y"]), s["w"], cells=s["cell"][:-1])
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        check_cells(np.array([1.0, np.nan]), 2)
    # unit weights, every row its own cell: the test's variance is the plain one (Welch's
    # separate variances instead of the pooled one, so the p-value moves only slightly)
    rng = np.random.default_rng(3)
    p1 = rng.uniform(0.05, 0.95, 400)
    y = (rng.uniform(size=400) < p1).astype(int)
    post = np.column_stack([1 - p1, p1])
    est = PriorEstimator(n_resamples=0).fit(post[:200], y[:200])
    a = est.estimate(post[200:])
    b = est.estimate(post[200:], cells=np.arange(200))
    assert b.shift_pvalue == pytest.approx(a.shift_pvalue, abs=0.02)
    np.testing.assert_array_equal(a.prior, b.prior)


def test_wrapper_takes_count_cells_and_leaves_plain_rows_alone(star98):
    from sklearn.linear_model import LogisticRegression

    s = star98
    lab = s["labelled"][s["cell"]]
    model = PriorShiftWrapper(LogisticRegression(C=1e6, max_iter=2000), random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.fit(s["Xr"][lab], s["y"][lab], sample_weight=s["w"][lab])
        assert model.prior_estimator_._src_cells is None  # never found on their own
        no_cells = model.adapt(s["Xr"][~lab], sample_weight=s["w"][~lab]).target_prior_interval_
        model.fit(s["Xr"][lab], s["y"][lab], sample_weight=s["w"][lab], cells=s["cell"][lab])
        assert model.prior_estimator_.n_source_cells_ == int(s["labelled"].sum())
        model.adapt(s["Xr"][~lab], sample_weight=s["w"][~lab], cells=s["cell"][~lab])
    assert not np.allclose(no_cells, model.target_prior_interval_)
    plain = PriorShiftWrapper(LogisticRegression(), random_state=0)
    with pytest.raises(ValueError, match="`cells` must be 1-d"):
        plain.fit(s["X"], (s["k"] / s["n"] > 0.4).astype(int), cells=np.arange(3))


def test_groups_are_judged_by_cells_not_trials():
    """A group of 2 cells with 10,000 trials is two observed rates, not 10,000 rows."""
    rng = np.random.default_rng(0)
    n_cells = 120
    trials = np.concatenate([np.full(n_cells, 40.0), [5000.0, 5000.0]])
    rate = rng.uniform(0.2, 0.6, trials.shape[0])
    k = rng.binomial(trials.astype(int), rate).astype(float)
    X = rate[:, None]
    Xr, yr, w = expand_counts(X, k, trials, drop_empty=False)
    cell = np.repeat(np.arange(trials.shape[0]), 2)
    group = np.where(cell >= n_cells, "big", "many")
    p = np.repeat(rate, 2)
    by_rows = calibration_by_group(yr, p, group, sample_weight=w, n_resamples=0)
    by_cells = calibration_by_group(yr, p, group, sample_weight=w, n_resamples=0, cells=cell)
    judged_rows = {c.group: c.judged for c in by_rows.groups}
    judged_cells = {c.group: c.judged for c in by_cells.groups}
    assert judged_rows == {"big": True, "many": True}
    assert judged_cells == {"big": False, "many": True}
    big = next(c for c in by_cells.groups if c.group == "big")
    assert big.cells == (2, 2, 2) and big.effective_rows == pytest.approx(10000.0)
    assert any("counting cells" in note for note in by_cells.notes)


def test_command_line_prevalence_passes_the_cells(star98, tmp_path, capsys, monkeypatch):
    """`probwrap prevalence --reference-cell-column/--cell-column` gives the API's numbers."""
    import json

    import pandas as pd

    import probwrap.cli._progress as progress
    from probwrap.cli import main

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)
    s = star98
    lab = s["labelled"][s["cell"]]
    risk = _near_exact(s["y"], 0.1)[:, 1]
    pd.DataFrame({"risk": risk[lab], "above": s["y"][lab], "pupils": s["w"][lab],
                  "district": [f"d{c}" for c in s["cell"][lab]]}).to_csv(tmp_path / "ref.csv",
                                                                         index=False)
    pd.DataFrame({"risk": risk[~lab], "pupils": s["w"][~lab],
                  "district": [f"d{c}" for c in s["cell"][~lab]]}).to_csv(tmp_path / "new.csv",
                                                                          index=False)
    base = ["prevalence", "--unlabelled", tmp_path / "new.csv", "--score-column", "risk",
            "--reference", tmp_path / "ref.csv", "--label-column", "above", "--weight-column",
            "pupils", "--reference-weight-column", "pupils", "--resamples", 50,
            "--format", "json"]

    def run(*extra):
        code = main([str(a) for a in [*base, *extra]])
        out, err = capsys.readouterr()
        assert code == 0, err
        return json.loads(out)

    cells = run("--cell-column", "district", "--reference-cell-column", "district")
    rows = run()
    from probwrap.cli._prevalence_numbers import kish_scaled, prevalence_from_reference

    api = prevalence_from_reference(
        risk[~lab], risk[lab], s["y"][lab], n_resamples=50, seed=0,
        sample_weight=kish_scaled(s["w"][~lab]), reference_weight=kish_scaled(s["w"][lab]),
        cells=s["cell"][~lab], reference_cells=s["cell"][lab])
    np.testing.assert_allclose(cells["interval"], api["interval"], rtol=1e-9)
    assert cells["shift_pvalue"] == pytest.approx(api["shift_pvalue"], rel=1e-9)
    width = np.diff(cells["interval"])[0]
    # without the cells the pupils' table is a count table, read as independent pupils like
    # the library reads it (session 27; before, Kish's count of the rows gave a wider interval
    # than the cells): the districts' clustering widens the interval several times over
    api_rows = prevalence_from_reference(
        risk[~lab], risk[lab], s["y"][lab], n_resamples=50, seed=0,
        sample_weight=s["w"][~lab], reference_weight=s["w"][lab])
    np.testing.assert_allclose(rows["interval"], api_rows["interval"], rtol=1e-9)
    assert rows["weights"]["cases"] == s["w"][~lab].sum()
    assert width > 5 * np.diff(rows["interval"])[0]
    with pytest.raises(SystemExit):
        main([str(a) for a in ["prevalence", "--unlabelled", tmp_path / "new.csv",
                               "--score-column", "risk", "--source-prevalence", "0.4",
                               "--cell-column", "district"]])
    assert "go with --reference" in capsys.readouterr().err


def test_multiclass_cells_reach_the_test_and_the_bootstrap():
    """More than two classes: with every row its own cell (unit weights) the shift test is the
    two-sample test with separate variances (shift_score_test, variance="separate", the
    Krishnamoorthy & Yu form); with labelled cells the interval is the BCa bootstrap over
    cells, and a cell of many rows drawn as one widens it against the same rows as units."""
    from probwrap.shift import shift_score_test

    rng = np.random.default_rng(0)

    def draw(n, prior):
        y = rng.choice(3, size=n, p=prior)
        z = np.eye(3)[y] * 1.5 + rng.normal(size=(n, 3)) * 0.7
        return np.exp(z) / np.exp(z).sum(axis=1, keepdims=True), y

    ps, ys = draw(300, [0.5, 0.3, 0.2])
    pt, _ = draw(300, [0.3, 0.4, 0.3])
    est = PriorEstimator(n_resamples=0).fit(ps, ys, cells=np.arange(300))
    res = est.estimate(pt, cells=np.arange(300))
    ref = shift_score_test(est.calibrate(pt), est.source_prior_,
                           source_proba=est.calibrate(ps), variance="separate")
    assert res.shift_pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    # 30 cells of 10 rows each whose rows are copies of one another: ten times fewer units
    copies = np.repeat(np.arange(30), 10)
    ps_c, ys_c = ps[::10][copies], ys[::10][copies]
    wide = {}
    for use in (False, True):
        est = PriorEstimator(n_resamples=200, interval="bca", random_state=0).fit(
            ps_c, ys_c, cells=copies if use else None)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            r = est.estimate(pt)
        assert np.all(r.interval[:, 0] <= r.prior) and np.all(r.prior <= r.interval[:, 1])
        wide[use] = float(np.mean(r.interval[:, 1] - r.interval[:, 0]))
    assert wide[True] > 1.3 * wide[False]  # measured 1.59


def test_report_judges_groups_by_cells():
    """The report's "By group" table: a group of 2 cells with 10,000 trials is not judged, and
    its size reads "10000 (2 cells)"."""
    from probwrap.report import build_report

    rng = np.random.default_rng(0)
    trials = np.concatenate([np.full(120, 40.0), [5000.0, 5000.0]])
    rate = rng.uniform(0.2, 0.6, trials.shape[0])
    k = rng.binomial(trials.astype(int), rate).astype(float)
    _, yr, w = expand_counts(rate[:, None], k, trials, drop_empty=False)
    cell = np.repeat(np.arange(trials.shape[0]), 2)
    group = np.where(cell >= 120, "big", "many")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content, page = build_report(y_true=yr, y_prob=np.repeat(rate, 2), sample_weight=w,
                                     groups=group, cells=cell, n_resamples=20, random_state=0)
    judged = {g.group: g.judged for g in content.group_checks.groups}
    assert judged == {"big": False, "many": True}
    row = page[page.find('data-group="big"'):]
    assert row.startswith('data-group="big"><td>big</td><td>10000 (2 cells)</td><td><b>too small')


def test_shift_score_test_with_cells_is_welch_on_statsmodels_cluster_variances(star98):
    """Two classes: the statistic is (mean_t - mean_s)^2 / (V_t + V_s) with each V statsmodels'
    cluster-robust variance of that sample's weighted mean score (times G / (G - 1)), and the
    estimator fitted without calibration gives the same p-value."""
    from probwrap.shift import shift_score_test

    s = star98
    lab = s["labelled"][s["cell"]]
    post = _near_exact(s["y"], 0.3)
    src = np.bincount(s["y"][lab], weights=s["w"][lab]) / s["w"][lab].sum()
    res = shift_score_test(post[~lab], src, sample_weight=s["w"][~lab],
                           source_proba=post[lab], source_sample_weight=s["w"][lab],
                           cells=s["cell"][~lab], source_cells=s["cell"][lab])
    u_t = _score_rows(post[~lab], src)[:, 0]
    u_s = _score_rows(post[lab], src)[:, 0]
    v_t = _statsmodels_cluster_var(u_t, s["w"][~lab], s["cell"][~lab])
    v_s = _statsmodels_cluster_var(u_s, s["w"][lab], s["cell"][lab])
    diff = np.average(u_t, weights=s["w"][~lab]) - np.average(u_s, weights=s["w"][lab])
    assert res.raw_statistic == pytest.approx(diff**2 / (v_t + v_s), rel=1e-9)
    est = PriorEstimator(calibration=None, n_resamples=0).fit(
        post[lab], s["y"][lab], s["w"][lab], cells=s["cell"][lab])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # (the ML share of these scores is at the edge)
        got = est.estimate(post[~lab], s["w"][~lab], cells=s["cell"][~lab])
    assert got.shift_pvalue == pytest.approx(res.pvalue, rel=1e-9)
    with pytest.raises(ValueError, match="variance='pooled'"):
        shift_score_test(post[~lab], src, source_proba=post[lab], cells=s["cell"][~lab],
                         variance="pooled")
