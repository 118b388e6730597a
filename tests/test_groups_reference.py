"""Reference tests for calibration_by_group.

Per-group calibration slope and intercept against a statsmodels GLM (Binomial, logit link) with
group interactions; scores and error rates against scikit-learn on each group's rows.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.special import logit
from sklearn import metrics as skm
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.metrics import bootstrap_interval, brier_score, calibration_by_group


@pytest.fixture(scope="module")
def grouped_holdout():
    """Held-out probabilities of a weak logistic model on scikit-learn's breast cancer data, with
    three groups cut from a feature the model does not use (tertiles of 'mean smoothness')."""
    X, y = load_breast_cancer(return_X_y=True)
    X_tr, X_te, y_tr, y_te = train_test_split(X, y, test_size=0.6, random_state=0, stratify=y)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.02)).fit(X_tr[:, [0, 1]], y_tr)
    p = model.predict_proba(X_te[:, [0, 1]])[:, 1]
    smooth = X_te[:, 4]
    groups = np.digitize(smooth, np.quantile(smooth, [1 / 3, 2 / 3]))
    w = np.random.default_rng(0).integers(1, 3, size=y_te.size).astype(float)
    return y_te, p, np.array(["low", "mid", "high"])[groups], w


def test_slope_and_intercept_equal_statsmodels_glm_with_group_interactions(grouped_holdout):
    y, p, g, w = grouped_holdout
    res = calibration_by_group(y, p, g, sample_weight=w, min_rows=0, min_events=0, n_resamples=0)
    levels = ["high", "low", "mid"]
    dummies = np.column_stack([(g == k).astype(float) for k in levels])
    x = logit(p)
    # slope: logit P(y=1) = a_g + b_g logit(p), one GLM with a group x logit(p) interaction
    design = np.column_stack((dummies, dummies * x[:, None]))
    fit = sm.GLM(y, design, family=sm.families.Binomial(), freq_weights=w).fit(tol=1e-13)
    # intercept (calibration-in-the-large): logit P(y=1) = c_g + logit(p), logit(p) as offset
    fit_c = sm.GLM(y, dummies, family=sm.families.Binomial(), freq_weights=w,
                   offset=x).fit(tol=1e-13)
    by_name = {c.group: c for c in res.groups}
    for k, name in enumerate(levels):
        # both are maximum-likelihood fits: ours stops at a 1e-12 relative Newton step,
        # statsmodels' IRLS at a 1e-13 deviance change; coefficients agree to about 1e-8
        assert by_name[name].calibration_slope == pytest.approx(fit.params[3 + k], rel=1e-6)
        assert by_name[name].calibration_intercept == pytest.approx(fit_c.params[k], rel=1e-6,
                                                                    abs=1e-8)


def test_scores_rates_and_costs_equal_sklearn_per_group(grouped_holdout):
    y, p, g, w = grouped_holdout
    costs = {"tp": -2.0, "fp": 1.0, "fn": 10.0, "tn": 0.0}
    res = calibration_by_group(y, p, g, cutoff=0.6, costs=costs, sample_weight=w,
                               min_rows=0, min_events=0, n_resamples=50, random_state=3)
    for c in res.groups:
        rows = g == c.group
        yy, pp, ww = y[rows], p[rows], w[rows]
        assert c.brier == pytest.approx(skm.brier_score_loss(yy, pp, sample_weight=ww), rel=1e-12)
        assert c.log_loss == pytest.approx(skm.log_loss(yy, pp, sample_weight=ww), rel=1e-12)
        act = (pp > 0.6).astype(int)
        tn, fp, fn, tp = skm.confusion_matrix(yy, act, sample_weight=ww, labels=[0, 1]).ravel()
        assert c.false_positive_rate == pytest.approx(fp / (fp + tn), rel=1e-12)
        assert c.false_negative_rate == pytest.approx(fn / (fn + tp), rel=1e-12)
        assert c.share_acted_on == pytest.approx((tp + fp) / ww.sum(), rel=1e-12)
        assert c.mean_cost == pytest.approx((-2 * tp + fp + 10 * fn) / ww.sum(), rel=1e-12)
        # consistency: the interval is the project's bootstrap on the group's rows, same seed
        ref = bootstrap_interval(brier_score, yy, pp, sample_weight=ww, n_resamples=50,
                                 random_state=3)
        assert c.brier_interval == pytest.approx(tuple(ref.confidence_interval), rel=1e-12)


def test_small_groups_are_listed_not_judged_and_weight_scale_changes_nothing():
    rng = np.random.default_rng(5)
    n = 2000
    g = np.where(rng.uniform(size=n) < 0.02, "rare", "common")
    p = rng.uniform(0.1, 0.9, size=n)
    y = (rng.uniform(size=n) < p).astype(int)
    res = calibration_by_group(y, p, g, n_resamples=0)
    assert [c.group for c in res.groups] == ["common", "rare"]
    assert [c.judged for c in res.groups] == [True, False]
    assert np.isfinite(res.groups[1].brier)  # still computed and shown
    assert res.gaps == []  # one judged group: no gap to report
    assert "rare" in res.notes[0]
    # Kish's effective sizes: scaling every weight leaves the judgement alone
    scaled = calibration_by_group(y, p, g, sample_weight=np.full(n, 0.001), n_resamples=0)
    assert [c.judged for c in scaled.groups] == [True, False]
    assert scaled.groups[0].effective_rows == pytest.approx(res.groups[0].effective_rows)


def test_largest_gap_first_names_the_miscalibrated_group():
    rng = np.random.default_rng(7)
    n = 6000
    g = rng.choice(["a", "b", "c"], size=n)
    p = rng.uniform(0.05, 0.7, size=n)
    truth = np.where(g == "c", np.clip(p + 0.15, 0, 1), p)  # group c under-forecast
    y = (rng.uniform(size=n) < truth).astype(int)
    res = calibration_by_group(y, p, g, n_resamples=0)
    assert res.groups[0].group == "c"  # largest calibration error first
    top = res.gaps[0]
    assert top.metric in {"calibration_intercept", "calibration_error"}
    assert top.highest == "c"


def test_bad_input_names_the_argument():
    y, p = [0, 1, 1, 0], [0.2, 0.7, 0.6, 0.4]
    with pytest.raises(ValueError, match="`groups`"):
        calibration_by_group(y, p, ["a", "b"])
    with pytest.raises(ValueError, match="`groups`"):
        calibration_by_group(y, p, [1.0, np.nan, 1.0, 2.0])
    with pytest.raises(ValueError, match="`cutoff`"):
        calibration_by_group(y, p, ["a"] * 4, cutoff=1.5)
    with pytest.raises(ValueError, match="`costs` needs `cutoff`"):
        calibration_by_group(y, p, ["a"] * 4, costs={"tp": 0, "fp": 1, "fn": 5, "tn": 0})
    with pytest.raises(ValueError, match="`min_rows`"):
        calibration_by_group(y, p, ["a"] * 4, min_rows=-1)
