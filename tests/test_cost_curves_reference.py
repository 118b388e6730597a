"""Reference tests for cost curves, Brier curves and lift/gain.

Sources: Drummond & Holte (2006, Machine Learning 65:95-130) for normalised expected cost;
Hernández-Orallo, Flach & Ferri (2011, ICML) for the Brier curve and its area; scikit-learn's
confusion_matrix, roc_curve, recall_score and brier_score_loss, and SciPy's quad for the numbers.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from sklearn import metrics as skm
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.metrics import brier_curve, brier_score, cost_curve, lift_gain


@pytest.fixture(scope="module")
def cancer_holdout():
    """Held-out probabilities of a weak logistic model on scikit-learn's breast cancer data."""
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, [0, 1, 4]]
    X_tr, X_te, y_tr, y_te = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05)).fit(X_tr, y_tr)
    return y_te, model.predict_proba(X_te)[:, 1]


def _nec_sklearn(y, p, cutoff, pc, w=None):
    # normalised expected cost of "act when p > cutoff" (Drummond & Holte 2006, eq. for NEC):
    # FNR * PC + FPR * (1 - PC), the rates from scikit-learn's confusion matrix
    tn, fp, fn, tp = skm.confusion_matrix(y, (p > cutoff).astype(int), labels=[0, 1],
                                          sample_weight=w).ravel()
    return fn / (fn + tp) * pc + fp / (fp + tn) * (1 - pc)


def test_cost_curve_lowest_cost_equals_brute_force_over_sklearn_cutoffs(cancer_holdout):
    y, p = cancer_holdout
    w = np.random.default_rng(0).integers(1, 4, size=y.size).astype(float)
    cc = cost_curve(y, p, n_points=11, sample_weight=w)
    cutoffs = np.concatenate(([-1.0], np.unique(p)))
    for pc, ours in zip(cc.probability_cost, cc.lowest_cost, strict=True):
        ref = min(_nec_sklearn(y, p, t, pc, w) for t in cutoffs)
        assert ours == pytest.approx(ref, abs=1e-12)  # same rates, other summation order


def test_cost_curve_forecast_cutoff_and_expected_cost(cancer_holdout):
    # the forecast's own cutoff at cost pair (C_FN, C_FP) is t = C_FP / (C_FP + C_FN); NEC is the
    # expected cost per row over its largest value pi C_FN + (1 - pi) C_FP (Drummond & Holte)
    y, p = cancer_holdout
    cc = cost_curve(y, p, n_points=21)
    pi = y.mean()
    for k in (3, 10, 15):
        pc = cc.probability_cost[k]
        # a cost pair giving this PC: C_FN = 1, C_FP = pi (1 - PC) / ((1 - pi) PC)
        c_fn, c_fp = 1.0, pi * (1 - pc) / ((1 - pi) * pc)
        act = p > c_fp / (c_fp + c_fn)
        cost = np.mean(np.where(y == 1, ~act * c_fn, act * c_fp))
        assert cc.forecast_cutoff_cost[k] == pytest.approx(
            cost / (pi * c_fn + (1 - pi) * c_fp), rel=1e-12)
        assert cc.forecast_cutoff_cost[k] >= cc.lowest_cost[k] - 1e-15


@pytest.mark.parametrize("weighted", [False, True])
def test_brier_curve_area_equals_brier_score(cancer_holdout, weighted):
    # Hernández-Orallo, Flach & Ferri (2011): with C_FP + C_FN = 2 and the cutoff set to the cost
    # proportion c, the area under the loss curve is the Brier score. Checked twice: our exact
    # area, and SciPy's quad of the loss with the forecasts as breakpoints, against
    # scikit-learn's brier_score_loss, to 1e-9.
    y, p = cancer_holdout
    w = np.random.default_rng(1).integers(1, 4, size=y.size).astype(float) if weighted else None
    bc = brier_curve(y, p, sample_weight=w)
    ref = skm.brier_score_loss(y, p, sample_weight=w)
    assert bc.area == pytest.approx(ref, abs=1e-9)
    ww = np.ones_like(p) if w is None else w

    def loss(c):
        act = p > c
        return 2 * np.sum(ww * np.where(y == 1, (1 - c) * ~act, c * act)) / ww.sum()

    pts = np.unique(p)
    pieces = np.concatenate(([0.0], pts, [1.0]))
    quad = sum(integrate.quad(loss, a, b)[0] for a, b in zip(pieces[:-1], pieces[1:], strict=True))
    assert quad == pytest.approx(ref, abs=1e-9)
    # the grid values are the loss itself
    np.testing.assert_allclose(bc.loss[::40], [loss(c) for c in bc.cost_proportion[::40]],
                               atol=1e-12)


def test_brier_curve_area_with_ties_and_extremes():
    y = [0, 1, 1, 0, 1, 0]
    p = [0.0, 1.0, 0.5, 0.5, 0.2, 0.2]
    assert brier_curve(y, p).area == pytest.approx(brier_score(y, p), abs=1e-12)


def test_gain_equals_recall_of_top_k_rule(cancer_holdout):
    # the gain at depth k/n is the recall of "review the k highest forecasts" (scikit-learn's
    # recall_score); lift is its precision over the overall rate
    y, p = cancer_holdout
    assert np.unique(p).size == p.size  # distinct forecasts: the top k rows are well defined
    n = y.size
    ks = np.array([5, 28, 100, n])
    lg = lift_gain(y, p, depth=ks / n)
    order = np.argsort(-p)
    for k, gain, lift in zip(ks, lg.gain, lg.lift, strict=True):
        act = np.zeros(n, dtype=int)
        act[order[:k]] = 1
        assert gain == pytest.approx(skm.recall_score(y, act), rel=1e-12)
        assert lift == pytest.approx(skm.precision_score(y, act) / y.mean(), rel=1e-9)


def test_gain_splits_a_tied_block_evenly():
    # consistency: a cut half-way into a tied block takes half of its positives (the mean over
    # random tie-breaking)
    y = [1, 1, 0, 0, 0, 0]
    p = [0.9, 0.5, 0.5, 0.5, 0.5, 0.1]
    lg = lift_gain(y, p, depth=[3 / 6])  # the 0.9 row and 2 of the 4 tied rows
    assert lg.gain[0] == pytest.approx((1 + 0.5 * 1) / 2, rel=1e-12)


def test_bad_input_names_the_argument():
    with pytest.raises(ValueError, match="`depth`"):
        lift_gain([0, 1], [0.2, 0.7], depth=0)
    with pytest.raises(ValueError, match="`n_points`"):
        cost_curve([0, 1], [0.2, 0.7], n_points=1)
    with pytest.raises(ValueError, match="both classes"):
        cost_curve([1, 1], [0.2, 0.7])


def test_displays_draw_the_numbers(cancer_holdout):
    from probwrap.plot import CostRangeDisplay, GainChartDisplay

    y, p = cancer_holdout
    disp = CostRangeDisplay.from_predictions(y, p, n_points=51)
    np.testing.assert_array_equal(disp.lowest_line_.get_ydata(), disp.cost.lowest_cost)
    np.testing.assert_array_equal(disp.brier_line_.get_ydata(), disp.brier.loss)
    assert f"{skm.brier_score_loss(y, p):.4f}" in disp.brier_ax_.get_title()
    gain = GainChartDisplay.from_predictions(y, p)
    np.testing.assert_array_equal(gain.line_.get_ydata()[1:], gain.result.gain)
