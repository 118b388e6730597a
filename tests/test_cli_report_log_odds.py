"""``probwrap report --scale log-odds`` (and ``write_report(score_scale="log-odds")``) with
log-odds beyond what probabilities can hold.

A probability is exactly 0 or 1 beyond log-odds of about +-36.7, and the calibration slope and
intercept on probabilities floor them at 1e-12 from the edges, i.e. read every log-odds beyond
logit(1 - 1e-12) = 27.63 as 27.63. Given log-odds, the report fits the slope and intercept (and
computes the log loss) on the log-odds as given. Data: 5-fold cross-validated margins of a
weakly penalised, standardised logistic regression (C=1000) on scikit-learn's bundled
breast-cancer set: 395 of 569 rows beyond 27.63, where the clipped slope was 0.177 and
statsmodels' GLM(binomial) on the given log-odds gives 0.127.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main

BOUND = math.log1p(-1e-12) - math.log(1e-12)


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def margins():
    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(C=1000, max_iter=20000).fit(X[:300], y[:300])
    return model.decision_function(X[300:]), y[300:]


@pytest.fixture(scope="module")
def wide_margins():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=1000, max_iter=10000))
    d = cross_val_predict(model, X, y, cv=5, method="decision_function")
    return d, y


@pytest.fixture(scope="module")
def glm(wide_margins):
    import statsmodels.api as sm

    d, y = wide_margins
    slope = sm.GLM(y, sm.add_constant(d), family=sm.families.Binomial()).fit()
    offset = sm.GLM(y, np.ones((d.shape[0], 1)), family=sm.families.Binomial(), offset=d).fit()
    return slope.params, offset.params[0]


def _metrics(content):
    return {m.key: m for m in content.metrics}


def test_margins_are_beyond_what_probabilities_hold(wide_margins, glm):
    d, _ = wide_margins
    assert int(np.sum(np.abs(d) > BOUND)) == 395
    assert glm[0][1] == pytest.approx(0.127, abs=5e-4)


def test_report_slope_and_intercept_equal_glm_on_the_given_log_odds(wide_margins, glm):
    from probwrap.report import build_report

    d, y = wide_margins
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        content, page = build_report(y_true=y, y_prob=d, score_scale="log-odds",
                                     n_resamples=20, random_state=0)
    rows = _metrics(content)
    # statsmodels GLM(binomial): logit P(y) = a + b d (slope), and d as an offset (intercept)
    assert rows["slope"].value == pytest.approx(glm[0][1], rel=1e-6)
    assert rows["intercept"].value == pytest.approx(glm[1], rel=1e-6)
    assert rows["slope"].low < rows["slope"].value < rows["slope"].high
    # the old page read the log-odds through probabilities clipped at 1e-12: 0.177
    assert abs(rows["slope"].value - 0.177) > 0.04
    assert not any("lie closer than" in str(w.message) for w in caught)
    # log loss exact from the log-odds: scipy's log_expit, no clip
    from scipy.special import log_expit

    expected = -np.mean(np.where(y == 1, log_expit(d), log_expit(-d)))
    assert rows["log_loss"].value == pytest.approx(expected, rel=1e-12)
    assert "0.127" in page


def test_fast_path_reads_the_same_log_odds(wide_margins, glm):
    # the one-pass bootstrap (>= 50,000 rows) takes the log-odds too; called directly here
    from scipy.special import expit, log_expit

    from probwrap.report._common import NoteLog
    from probwrap.report._fast_metrics import fast_metric_rows

    d, y = wide_margins
    labels = {k: k for k in ("brier", "log_loss", "ece", "slope", "intercept")}
    rows = {r.key: r for r in fast_metric_rows(y, expit(d), None, 10, 20, 0.95, 0, NoteLog(),
                                               labels, log_odds=d)}
    assert rows["slope"].value == pytest.approx(glm[0][1], rel=1e-6)
    assert rows["intercept"].value == pytest.approx(glm[1], rel=1e-6)
    expected = -np.mean(np.where(y == 1, log_expit(d), log_expit(-d)))
    assert rows["log_loss"].value == pytest.approx(expected, rel=1e-12)


def test_cli_page_shows_the_glm_slope_and_no_floor_warning(wide_margins, glm, tmp_path,
                                                           capsys):
    d, y = wide_margins
    pd.DataFrame({"margin": d, "y": y}).to_csv(tmp_path / "scores.csv", index=False)
    code = main(["report", "--scores", str(tmp_path / "scores.csv"), "--score-column",
                 "margin", "--label-column", "y", "--scale", "log-odds", "--resamples", "20",
                 "--out", str(tmp_path / "r.html")])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "27.6" not in err and "exactly 0 or 1" not in err and "below 2.22e-16" not in err
    page = (tmp_path / "r.html").read_text()
    assert f"{glm[0][1]:.3f}" in page and "0.177" not in page


def test_score_scale_is_checked():
    from probwrap.report import build_report

    with pytest.raises(ValueError, match="score_scale"):
        build_report(y_true=[0, 1], y_prob=[0.2, 0.8], score_scale="logit")
    with pytest.raises(ValueError, match="non-finite"):
        build_report(y_true=[0, 1, 0], y_prob=[0.0, np.inf, 1.0], score_scale="log-odds")
    with pytest.raises(ValueError, match="1-d"):
        build_report(y_true=[0, 1], y_prob=[[0.0, 1.0], [1.0, 0.0]], score_scale="log-odds")


def test_slope_on_probabilities_reads_log_odds_floored_at_the_bound(margins):
    # the probability path is unchanged: checked against statsmodels' GLM on the log-odds
    # clipped at +-logit(1 - 1e-12); here the rows beyond the bound are all on their correct
    # side, so the given log-odds give the same slope to 1e-9 (a confident error would not)
    import statsmodels.api as sm

    from probwrap.calibration import log_odds_to_proba
    from probwrap.metrics._slope import slope_intercept_fit, slope_intercept_fit_log_odds

    d, y = margins
    fit = slope_intercept_fit(y, log_odds_to_proba(d))
    clipped = sm.GLM(y, sm.add_constant(np.clip(d, -BOUND, BOUND)),
                     family=sm.families.Binomial()).fit()
    assert fit.slope == pytest.approx(clipped.params[1], rel=1e-5)
    assert fit.slope_fit_intercept == pytest.approx(clipped.params[0], rel=1e-5, abs=1e-6)
    given = slope_intercept_fit_log_odds(y, d)
    exact = sm.GLM(y, sm.add_constant(d), family=sm.families.Binomial()).fit()
    assert given.slope == pytest.approx(exact.params[1], rel=1e-6)


# -- by group ------------------------------------------------------------------------------------
# Groups: the breast-cancer rows split at the median of "mean texture" (284 and 285 rows, 118 and
# 239 malignant; 201 and 194 of them beyond +-27.63). Before, each group's slope was fitted on
# logit(expit(d)) clipped at +-27.63 while the overall slope read the log-odds: 0.175 and 0.172
# where statsmodels' Logit on the given log-odds gives 0.122 and 0.123.
@pytest.fixture(scope="module")
def texture_groups():
    X, _ = load_breast_cancer(return_X_y=True)
    return np.where(X[:, 1] > np.median(X[:, 1]), "rough", "smooth")


def _group_references(d, y, g):
    """statsmodels per group: Logit slope on the given log-odds, GLM(binomial) intercept with
    the log-odds as offset, and the exact log loss."""
    import statsmodels.api as sm
    from scipy.special import log_expit

    out = {}
    for k in np.unique(g):
        m = g == k
        slope = sm.Logit(y[m], sm.add_constant(d[m])).fit(disp=0).params[1]
        offset = sm.GLM(y[m], np.ones((int(m.sum()), 1)), family=sm.families.Binomial(),
                        offset=d[m]).fit().params[0]
        loss = -np.mean(np.where(y[m] == 1, log_expit(d[m]), log_expit(-d[m])))
        out[str(k)] = (slope, offset, loss)
    return out


def test_group_slopes_read_the_given_log_odds(wide_margins, texture_groups, glm):
    from probwrap.report import build_report

    d, y = wide_margins
    ref = _group_references(d, y, texture_groups)
    assert ref["rough"][0] == pytest.approx(0.122, abs=5e-4)
    assert ref["smooth"][0] == pytest.approx(0.123, abs=5e-4)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content, _ = build_report(y_true=y, y_prob=d, score_scale="log-odds",
                                  groups=texture_groups, n_resamples=20, random_state=0)
    checks = content.group_checks
    assert {c.group for c in checks.groups} == {"rough", "smooth"}
    for c in checks.groups:
        slope, offset, loss = ref[c.group]
        assert c.judged
        assert c.calibration_slope == pytest.approx(slope, rel=1e-6)  # was 0.175 / 0.172
        assert c.calibration_intercept == pytest.approx(offset, rel=1e-6)
        assert c.log_loss == pytest.approx(loss, rel=1e-12)
    # the groups' "all" row is the overall slope of the report's own metric rows
    assert checks.overall.calibration_slope == pytest.approx(glm[0][1], rel=1e-6)
    assert checks.overall.calibration_slope == pytest.approx(
        _metrics(content)["slope"].value, rel=1e-9)
    assert not any("lie closer than" in n for n in checks.notes)


def test_cli_group_slopes_read_the_given_log_odds(wide_margins, texture_groups, tmp_path,
                                                  capsys):
    import json

    d, y = wide_margins
    ref = _group_references(d, y, texture_groups)
    pd.DataFrame({"margin": d, "y": y, "texture": texture_groups}).to_csv(
        tmp_path / "scores.csv", index=False)
    code = main(["report", "--scores", str(tmp_path / "scores.csv"), "--score-column",
                 "margin", "--label-column", "y", "--scale", "log-odds", "--group-column",
                 "texture", "--resamples", "20", "--out", str(tmp_path / "r.html"),
                 "--format", "json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    groups = json.loads(captured.out)["groups"]
    for row in groups["groups"]:
        assert row["calibration_slope"] == pytest.approx(ref[row["group"]][0], rel=1e-6)
        assert row["calibration_intercept"] == pytest.approx(ref[row["group"]][1], rel=1e-6)
    assert not any("lie closer than" in n for n in groups["notes"])
    page = (tmp_path / "r.html").read_text()
    assert f"<td>{ref['rough'][0]:.3f}</td>" in page and "<td>0.175</td>" not in page


def test_calibration_by_group_checks_its_log_odds(wide_margins, texture_groups):
    from scipy.special import expit

    from probwrap.metrics import calibration_by_group

    d, y = wide_margins
    with pytest.raises(ValueError, match=r"`y_prob` must be expit\(`log_odds`\)"):
        calibration_by_group(y, expit(d), texture_groups, log_odds=2 * d, n_resamples=0)
    with pytest.raises(ValueError, match="`log_odds` must be 569 finite numbers"):
        calibration_by_group(y, expit(d), texture_groups, log_odds=d[:10], n_resamples=0)
    # the gap of the slopes between the groups: its interval resamples the given log-odds too
    res = calibration_by_group(y, expit(d), texture_groups, log_odds=d, n_resamples=20)
    gap = next(x for x in res.gaps if x.metric == "calibration_slope")
    ref = _group_references(d, y, texture_groups)
    assert gap.gap == pytest.approx(abs(np.log(ref["rough"][0] / ref["smooth"][0])),
                                       rel=1e-5)
