"""``strategy="tuned"`` settles toward the plug-in cutoff carried back through a recalibration.

On a few hundred held-out rows the one-sided test of ``settle_cutoff`` seldom rejects the
plug-in cutoff ``c_fp / (c_fp + c_fn)``, so the tuned cutoff used to stay on the model's own
probabilities even where they are plainly off (naive Bayes, boosting). The wrapper now keeps the
cutoff at which the held-out rows' recalibrated probability crosses the plug-in value — the
model's own probabilities unless a map beats them in cross-validated log loss by more than one
standard error — unless the rows show that the least-cost cutoff costs less. The cases below are
cells of ``benchmarks/crossfit_sweep.py --only cost``; the outside reference is scikit-learn's
``TunedThresholdClassifierCV`` with the same costs on the same rows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import make_scorer
from sklearn.model_selection import TunedThresholdClassifierCV
from sklearn.naive_bayes import GaussianNB

import probwrap._cost_policy_rules as rules
from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.decision import plugin_cutoff, settle_cutoff

C_FN = 10.0
COSTS = {"fp": 1.0, "fn": C_FN}


def _cost(y, act) -> float:
    act = np.asarray(act).astype(int)
    return float(np.mean((act == 1) & (y == 0)) + C_FN * np.mean((act == 0) & (y == 1)))


def _sklearn_tuned(model, X, y, **kw):
    scorer = make_scorer(lambda yy, pp: -_cost(np.asarray(yy), pp))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return TunedThresholdClassifierCV(model, scoring=scorer, **kw).fit(X, y)


def _cancer_draw():
    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)  # malignant, the minority, is the positive class
    idx = np.random.default_rng(0).permutation(len(y))
    return X[idx[:100]], y[idx[:100]], X[idx[100:]], y[idx[100:]]


def test_cross_fitted_naive_bayes_beats_sklearn_where_the_plugin_cutoff_did_not(monkeypatch):
    X, y, Xt, yt = _cancer_draw()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ours = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned",
                                 random_state=0).fit(X, y)
        monkeypatch.setattr(rules, "RECALIBRATED_ANCHOR_MAX_ROWS", 0)
        old = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned",
                                random_state=0).fit(X, y)
    sk = _sklearn_tuned(GaussianNB(), X, y, cv=5, random_state=0)
    ref = _cost(yt, sk.predict(Xt))
    assert old.cutoff_anchor_ == pytest.approx(plugin_cutoff(old.cost_matrix_))
    assert old.cutoff_anchor_map_ is None
    assert ours.cutoff_anchor_map_ not in (None, "identity")
    # naive Bayes' probabilities are far too extreme here: the recalibrated crossing lies far
    # below the plug-in cutoff of 1/11
    assert ours.cutoff_anchor_ < 1e-3
    assert _cost(yt, ours.predict(Xt)) <= ref  # 0.177 against scikit-learn's 0.211
    assert _cost(yt, old.predict(Xt)) > 1.2 * ref  # the plug-in cutoff: 0.269


def test_frozen_naive_bayes_on_diabetes_matches_sklearn(monkeypatch):
    X, t = load_diabetes(return_X_y=True)
    y = (t > np.quantile(t, 0.5)).astype(int)
    idx = np.random.default_rng(0).permutation(len(y))
    fit, held, test = idx[:147], idx[147:247], idx[247:]
    model = GaussianNB().fit(X[fit], y[fit])
    ours = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                             random_state=0).fit(X[held], y[held])
    monkeypatch.setattr(rules, "RECALIBRATED_ANCHOR_MAX_ROWS", 0)
    old = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                            random_state=0).fit(X[held], y[held])
    sk = _sklearn_tuned(model, X[held], y[held], cv="prefit", refit=False)
    ref = _cost(y[test], sk.predict(X[test]))
    assert _cost(y[test], ours.predict(X[test])) <= ref  # 0.595 against 0.615
    assert _cost(y[test], old.predict(X[test])) > 1.3 * ref  # the plug-in cutoff: 0.846


def test_anchor_reproduces_the_recalibrated_plugin_decisions_on_the_heldout_rows():
    X, y, _, _ = _cancer_draw()
    model = GaussianNB().fit(X[:50], y[:50])
    Xh, yh = X[50:], y[50:]
    pol = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                            random_state=0).fit(Xh, yh)
    name = pol.cutoff_anchor_map_
    assert name not in (None, "identity")
    # the same map fitted by the calibration wrapper on the same rows
    cal = CalibrationWrapper(FrozenEstimator(model), method=name, random_state=0).fit(Xh, yh)
    p = model.predict_proba(Xh)[:, 1]
    q = cal.predict_proba(Xh)[:, 1]
    t0 = 1 / (1 + C_FN)
    np.testing.assert_array_equal(p > pol.cutoff_anchor_, q > t0)
    # the cutoff kept is the anchor unless the rows reject it (settle_cutoff with that anchor)
    s = settle_cutoff(p, yh, COSTS, pol.cost_curve_, anchor=pol.cutoff_anchor_)
    assert pol.cutoff_ == s.cutoff
    assert s.anchor == pol.cutoff_anchor_ and s.plugin == pytest.approx(t0)


def test_well_calibrated_model_keeps_the_plugin_cutoff():
    # a logistic regression fitted on the very process that made the labels: no map beats its
    # own probabilities by a standard error, so the anchor is the plain plug-in cutoff
    rng = np.random.default_rng(5)
    X = rng.normal(size=(2400, 2))
    y = (rng.random(2400) < 1 / (1 + np.exp(-(X[:, 0] - 1.5)))).astype(int)
    model = LogisticRegression().fit(X[:1200], y[:1200])
    pol = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                            random_state=0).fit(X[1200:], y[1200:])
    assert pol.cutoff_anchor_map_ == "identity"
    assert pol.cutoff_anchor_ == pytest.approx(1 / (1 + C_FN))


def test_above_the_row_bound_the_anchor_is_the_plugin_cutoff(monkeypatch):
    X, y, _, _ = _cancer_draw()
    monkeypatch.setattr(rules, "RECALIBRATED_ANCHOR_MAX_ROWS", 99)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pol = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned",
                                random_state=0).fit(X, y)
    assert pol.cutoff_anchor_map_ is None
    assert pol.cutoff_anchor_ == pytest.approx(1 / (1 + C_FN))


def test_the_anchor_ignores_the_scale_of_the_weights():
    # importance weights (summing to less than the rows: Kish's effective size, see
    # docs/calibration.md, "Weights") normalised to sum 1, scaled by 1e-3, and by 24.5
    X, y, _, _ = _cancer_draw()
    model = GaussianNB().fit(X[:50], y[:50])
    w = np.random.default_rng(1).integers(1, 4, size=50).astype(float)
    w = w / w.sum()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the warning that the weights count as importance
        fits = [CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                                  random_state=0).fit(X[50:], y[50:], sample_weight=w * s)
                for s in (1.0, 1e-3, 24.5)]
    for f in fits[1:]:
        assert f.cutoff_anchor_map_ == fits[0].cutoff_anchor_map_
        assert f.cutoff_anchor_ == pytest.approx(fits[0].cutoff_anchor_, rel=1e-9)
        assert f.cutoff_ == pytest.approx(fits[0].cutoff_, rel=1e-9)


def test_settle_cutoff_anchor_argument():
    p = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8]
    y = [0, 0, 0, 0, 0, 1, 1, 1]
    costs = {"fp": 1.0, "fn": 3.0}
    plain = settle_cutoff(p, y, costs)
    # three negatives between 0.25 and 0.55 cannot show that the plug-in cutoff costs more
    # (exact binomial p = (3/4)^3 = 0.42)
    assert plain.anchor is None and (plain.plugin, plain.cutoff) == (0.25, 0.25)
    # an anchor at the least-cost cutoff is kept as it is
    kept = settle_cutoff(p, y, costs, anchor=0.55)
    assert kept.kept_plugin and kept.cutoff == 0.55 and kept.anchor == 0.55
    assert kept.plugin == 0.25 and kept.excess == pytest.approx(0.0)
    # an anchor the rows reject (it flags nothing: three missed positives cost 9/8 a row) moves
    # to the nearest cutoff not shown to cost more, from above
    far = settle_cutoff(p, y, costs, anchor=0.95)
    assert not far.kept_plugin and far.cutoff < 0.95 and far.anchor == 0.95
    for bad in (-1.5, 1.5, float("nan"), "x"):
        with pytest.raises(ValueError, match="`anchor`"):
            settle_cutoff(p, y, costs, anchor=bad)
    # an anchor below 0 flags every row, probabilities of exactly 0 included
    p0 = [0.0, 0.0, 0.0, 0.2, 0.6, 1.0, 1.0, 1.0]
    y0 = [0, 1, 1, 0, 1, 1, 1, 1]
    kept_all = settle_cutoff(p0, y0, {"fp": 1.0, "fn": 10.0}, anchor=-0.1)
    assert kept_all.kept_plugin and kept_all.cutoff == -0.1


def test_a_map_that_lifts_zero_above_the_plugin_value_flags_exact_zeros():
    # probabilities piled at exactly 0 and 1 (naive Bayes on many features): a third of the rows
    # at 0 are positives, far above the plug-in value 1/11, so the recalibrated plug-in rule
    # flags every row - which on p > c takes a cutoff below 0 (0 itself leaves the zeros out)
    rng = np.random.default_rng(0)
    p = np.concatenate([np.zeros(120), np.ones(80), rng.uniform(0.05, 0.95, 40)])
    y = np.concatenate([rng.random(120) < 1 / 3, rng.random(80) < 0.9,
                        rng.random(40) < 0.5]).astype(int)
    c, name = rules.recalibrated_plugin_cutoff(p, y, np.ones(p.shape[0]), 1 / 11, 0)
    assert name not in (None, "identity")
    cal = CalibrationWrapper(FrozenEstimator(rules.ProbabilityColumn().fit()), method=name,
                             random_state=0).fit(p[:, None], y)
    assert cal.predict_proba([[0.0]])[0, 1] > 1 / 11  # the map's own verdict on p = 0
    assert c < 0.0
    assert np.all(p > c)
    # the value is the cutoff search's own "flag every row" cutoff (half a mean gap below 0)
    u = np.unique(p)
    assert c == pytest.approx(-0.5 * (u[-1] - u[0]) / (u.shape[0] - 1))


def test_cross_fitted_naive_bayes_on_digits_flags_the_rows_its_map_lifts():
    # scikit-learn's digits, "8" against the rest, naive Bayes cross-fitted on 100 rows, a miss
    # costing 30 (found by running the cells of benchmarks/crossfit_sweep.py --only cost on
    # digits' one-against-rest tasks with that cost; docs/evidence/small_data_log.md, fourteenth session): the
    # out-of-fold probabilities pile at exactly 0 and 1, the map chosen on them lifts 0 above
    # the plug-in value, and the tuned rule now flags every row as scikit-learn's
    # TunedThresholdClassifierCV and the plug-in rule on CalibrationWrapper(model) would say;
    # with the anchor at 0 the rows at exactly 0 were left out (test cost 1.17 a row)
    from sklearn.datasets import load_digits

    X, t = load_digits(return_X_y=True)
    y = (t == 8).astype(int)
    idx = np.random.default_rng(3).permutation(len(y))
    tr, te = idx[:100], idx[100:]
    costs = {"fp": 1.0, "fn": 30.0}

    def cost(act):
        act = np.asarray(act).astype(int)
        return float(np.mean((act == 1) & (y[te] == 0)) + 30 * np.mean((act == 0) & (y[te] == 1)))

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ours = CostPolicyWrapper(GaussianNB(), costs=costs, strategy="tuned",
                                 random_state=0).fit(X[tr], y[tr])
        scorer = make_scorer(lambda yy, pp: -float(
            np.mean((np.asarray(pp) == 1) & (np.asarray(yy) == 0))
            + 30 * np.mean((np.asarray(pp) == 0) & (np.asarray(yy) == 1))))
        sk = TunedThresholdClassifierCV(GaussianNB(), scoring=scorer, cv=5,
                                        random_state=0).fit(X[tr], y[tr])
    assert ours.cutoff_anchor_ < 0.0 and ours.cutoff_ < 0.0
    assert cost(ours.predict(X[te])) == pytest.approx(float(np.mean(y[te] == 0)))
    assert cost(ours.predict(X[te])) <= cost(sk.predict(X[te])) + 1e-12
    assert cost(ours.predict(X[te])) < 1.0  # the anchor at 0 gave 1.17


def test_sklearn_sigmoid_recalibration_agrees_on_the_direction():
    # scikit-learn's own sigmoid recalibration of the frozen naive Bayes model on the same
    # held-out rows (an outside reference for "the model's probabilities are too extreme"):
    # its plug-in decisions flag at least as many held-out rows as the raw plug-in cutoff, and
    # so does the anchor
    X, y, _, _ = _cancer_draw()
    model = GaussianNB().fit(X[:50], y[:50])
    Xh, yh = X[50:], y[50:]
    sk = CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid").fit(Xh, yh)
    pol = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                            random_state=0).fit(Xh, yh)
    p = model.predict_proba(Xh)[:, 1]
    t0 = 1 / (1 + C_FN)
    raw = int(np.sum(p > t0))
    assert int(np.sum(sk.predict_proba(Xh)[:, 1] > t0)) >= raw
    assert int(np.sum(p > pol.cutoff_anchor_)) >= raw


def test_a_map_chosen_without_cross_validation_is_not_an_anchor():
    # one positive row: auto cannot score the maps and would fall back to Platt scaling fitted
    # on that one row; the anchor is then the plain plug-in cutoff
    from probwrap._column_models import ProbabilityColumn

    rng = np.random.default_rng(0)
    p = rng.uniform(size=30)
    y = np.zeros(30, dtype=int)
    y[5] = 1
    pol = CostPolicyWrapper(FrozenEstimator(ProbabilityColumn().fit()), costs=COSTS,
                            strategy="tuned").fit(p[:, None], y)
    assert pol.cutoff_anchor_map_ is None
    assert pol.cutoff_anchor_ == pytest.approx(1 / (1 + C_FN))
    assert pol.cutoff_ == settle_cutoff(p, y, COSTS, pol.cost_curve_).cutoff
