"""Behaviour and reference tests of CostPolicyWrapper."""

from __future__ import annotations

import pickle
import warnings

import numpy as np
import pytest
import sklearn
from scipy.stats import binomtest
from sklearn.datasets import load_breast_cancer, load_iris, make_classification
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import make_scorer
from sklearn.model_selection import (
    GridSearchCV,
    StratifiedKFold,
    TunedThresholdClassifierCV,
    cross_val_predict,
    cross_validate,
)
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.decision import (
    add_reject_action,
    bayes_actions,
    make_cost_scorer,
    plugin_cutoff,
    realised_cost,
    search_cutoff,
    settle_cutoff,
)

COSTS = {"fp": 2.0, "fn": 35.0}
C2 = np.array([[0.0, 2.0], [35.0, 0.0]])


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=500))


@pytest.fixture(scope="module")
def cancer():
    # scikit-learn's bundled Wisconsin breast cancer data; class 1 is "benign", so flip to make
    # the malignant class the positive one.
    X, y = load_breast_cancer(return_X_y=True)
    return X, 1 - y


def test_bayes_uses_elkan_cutoff(cancer):
    X, y = cancer
    policy = CostPolicyWrapper(_model(), costs=COSTS).fit(X, y)
    # Elkan (2001) section 2: cutoff 2 / (2 + 35)
    assert policy.cutoff_ == pytest.approx(2.0 / 37.0, rel=1e-12)
    p = policy.predict_proba(X)[:, 1]
    np.testing.assert_array_equal(policy.predict(X), (p > 2.0 / 37.0).astype(int))
    # predict_proba passes the refitted estimator's probabilities through unchanged
    np.testing.assert_array_equal(policy.predict_proba(X), policy.estimator_.predict_proba(X))
    np.testing.assert_allclose(policy.expected_costs(X), policy.predict_proba(X) @ C2)
    assert policy.heldout_cost_ is None


def test_tuned_pools_out_of_fold_predictions_into_one_curve(cancer):
    # Reference: scikit-learn's cross_val_predict with the same folds, then one exact search.
    X, y = cancer
    policy = CostPolicyWrapper(_model(), costs=COSTS, strategy="tuned", cv=4, random_state=0)
    policy.fit(X, y)
    folds = StratifiedKFold(4, shuffle=True, random_state=0)
    oof = cross_val_predict(_model(), X, y, cv=folds, method="predict_proba")[:, 1]
    ref = search_cutoff(oof, y, C2, score_bounds=(0, 1))
    assert policy.cost_curve_.cutoff == pytest.approx(ref.cutoff, rel=1e-10)
    # the rule is the cutoff the pooled rows support (settled toward the plug-in cutoff)
    assert policy.cutoff_ == pytest.approx(settle_cutoff(oof, y, C2, ref).cutoff, rel=1e-10)
    np.testing.assert_allclose(policy.cost_curve_.costs, ref.costs, rtol=1e-10)
    assert policy.heldout_cost_ == pytest.approx(
        realised_cost(y, (oof > policy.cutoff_).astype(int), costs=C2), rel=1e-10
    )
    ci = policy.cutoff_interval_
    # each fold's cutoff is the exact search on that fold's out-of-fold rows alone
    for k, (_, test) in enumerate(folds.split(X, y)):
        ref_k = search_cutoff(oof[test], y[test], C2, score_bounds=(0, 1))
        assert ci.fold_cutoffs[k] == pytest.approx(ref_k.cutoff, rel=1e-10)
    assert ci.bootstrap_cutoffs.shape == (200,)
    # consistency: the percentile interval of the resampled cutoffs
    assert (ci.low, ci.high) == pytest.approx(np.quantile(ci.bootstrap_cutoffs, [0.025, 0.975]),
                                             rel=1e-12)
    assert policy.cutoff_interval_ is ci  # computed once


def test_cutoff_interval_with_zero_weight_rows():
    # Regression: zero weights are valid (absent rows); a bootstrap resample of only zero-weight
    # rows used to raise IndexError. Now the interval equals the one without those rows.
    X, y = make_classification(400, weights=[0.8], random_state=7)
    inner = FrozenEstimator(LogisticRegression().fit(X[:200], y[:200]))
    w = np.zeros(200)
    w[:6] = 1.0
    policy = CostPolicyWrapper(inner, costs=COSTS, strategy="tuned", random_state=0)
    policy.fit(X[200:], y[200:], sample_weight=w)
    ci = policy.cutoff_interval_
    ref = CostPolicyWrapper(inner, costs=COSTS, strategy="tuned", random_state=0)
    ref.fit(X[200:206], y[200:206])
    np.testing.assert_array_equal(ci.bootstrap_cutoffs, ref.cutoff_interval_.bootstrap_cutoffs)


def test_frozen_estimator_not_refitted_and_all_rows_heldout():
    X, y = make_classification(600, weights=[0.9], random_state=0)
    inner = LogisticRegression().fit(X[:300], y[:300])
    coef = inner.coef_.copy()
    policy = CostPolicyWrapper(FrozenEstimator(inner), costs=COSTS, strategy="tuned")
    policy.fit(X[300:], y[300:])
    np.testing.assert_array_equal(inner.coef_, coef)
    assert policy.estimator_.estimator is inner
    p = inner.predict_proba(X[300:])[:, 1]
    ref = search_cutoff(p, y[300:], C2, score_bounds=(0, 1))
    assert policy.cost_curve_.cutoff == pytest.approx(ref.cutoff)
    assert policy.cutoff_ == pytest.approx(settle_cutoff(p, y[300:], C2, ref).cutoff)
    assert policy.cutoff_interval_.fold_cutoffs.shape == (0,)


def test_tuned_never_worse_than_scikit_learn_grid_on_same_rows():
    # Reference: scikit-learn's TunedThresholdClassifierCV on the same frozen model and held-out
    # rows. Its candidates are a subset of all cutoffs, so the exact search cannot do worse there;
    # the cutoff kept (settled toward the recalibrated plug-in cutoff) is one that the exact
    # one-sided 5 % binomial test (SciPy's binomtest) on the rows between it and the least-cost
    # cutoff does not show to cost more: their share of positives against the plug-in cutoff.
    X, y = make_classification(4000, weights=[0.93], flip_y=0.02, random_state=1)
    inner = LogisticRegression().fit(X[:2000], y[:2000])
    Xh, yh = X[2000:], y[2000:]
    scorer = make_scorer(realised_cost, greater_is_better=False, costs=C2, classes=[0, 1])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sk = TunedThresholdClassifierCV(
            FrozenEstimator(inner), scoring=scorer, cv="prefit", refit=False
        ).fit(Xh, yh)
    ours = CostPolicyWrapper(FrozenEstimator(inner), costs=COSTS, strategy="tuned").fit(Xh, yh)
    p = inner.predict_proba(Xh)[:, 1]
    sk_cost = realised_cost(yh, (p >= sk.best_threshold_).astype(int), costs=C2)
    assert ours.cost_curve_.cost <= sk_cost + 1e-12
    # settled toward the plug-in cutoff carried back through the map fitted on these rows
    settled = settle_cutoff(p, yh, C2, ours.cost_curve_, anchor=ours.cutoff_anchor_)
    assert ours.cutoff_ == settled.cutoff
    lo, hi = sorted((ours.cutoff_, ours.cost_curve_.cutoff))
    between = (p > lo) & (p <= hi)
    k, m = int(yh[between].sum()), int(between.sum())
    side = "less" if ours.cutoff_ < ours.cost_curve_.cutoff else "greater"
    assert binomtest(k, m, plugin_cutoff(C2), alternative=side).pvalue > 0.05
    # the least-cost cutoff's held-out cost is scikit-learn's best score (its grid is coarser);
    # the cost reported is that of the cutoff kept, on the same rows
    assert ours.cost_curve_.cost == pytest.approx(-sk.best_score_, abs=0.01)
    assert ours.heldout_cost_ == pytest.approx(
        realised_cost(yh, (p > ours.cutoff_).astype(int), costs=C2), abs=1e-12)


def test_fixed_cutoff_grid_search_by_expected_cost(cancer):
    X, y = cancer
    scorer = make_cost_scorer(COSTS, classes=[0, 1])
    grid = GridSearchCV(
        CostPolicyWrapper(_model(), strategy="fixed", cutoff=0.5),
        {"cutoff": [0.02, 0.05, 0.2, 0.5]},
        scoring=scorer,
        cv=StratifiedKFold(3, shuffle=True, random_state=0),
    ).fit(X, y)
    # Reference: recompute one cell by hand
    folds = list(StratifiedKFold(3, shuffle=True, random_state=0).split(X, y))
    train, test = folds[0]
    m = _model().fit(X[train], y[train])
    pred = (m.predict_proba(X[test])[:, 1] > 0.05).astype(int)
    idx = grid.cv_results_["params"].index({"cutoff": 0.05})
    assert grid.cv_results_["split0_test_score"][idx] == pytest.approx(
        -realised_cost(y[test], pred, costs=C2)
    )
    assert grid.best_params_["cutoff"] < 0.5


def test_multiclass_reject_action_is_chow_rule():
    # Chow (1970): 0-1 costs plus a reject cost d -> refer iff max_k p_k < 1 - d.
    X, y = load_iris(return_X_y=True)
    costs = add_reject_action(1 - np.eye(3), 0.2)
    policy = CostPolicyWrapper(
        _model(), costs=costs, actions=["setosa", "versicolor", "virginica", "refer"]
    ).fit(X, y)
    p = policy.predict_proba(X)
    expected = np.where(p.max(axis=1) < 0.8, "refer", np.array(policy.actions_)[p.argmax(1)])
    np.testing.assert_array_equal(policy.predict(X), expected)
    assert policy.cutoff_ is None
    np.testing.assert_array_equal(policy.class_offsets_, np.zeros(3))


def test_multiclass_tuned_offsets_never_worse_on_heldout():
    X, y = load_iris(return_X_y=True)
    costs = np.array([[0, 1, 8], [3, 0, 1], [20, 2, 0]], dtype=float)
    tuned = CostPolicyWrapper(_model(), costs=costs, strategy="tuned", random_state=0).fit(X, y)
    folds = StratifiedKFold(5, shuffle=True, random_state=0)
    oof = cross_val_predict(_model(), X, y, cv=folds, method="predict_proba")
    plain = realised_cost(y, bayes_actions(oof, costs), costs=costs)
    assert tuned.heldout_cost_ <= plain + 1e-12
    fixed = CostPolicyWrapper(_model(), costs=costs, strategy="fixed",
                              cutoff=tuned.class_offsets_).fit(X, y)
    np.testing.assert_array_equal(fixed.predict(X), tuned.predict(X))


def test_per_row_costs_from_X():
    # Each parcel's refund is its value (column 0 here); inspection costs 2.
    rng = np.random.default_rng(0)
    X, y = make_classification(800, weights=[0.85], random_state=2)
    value = rng.uniform(5, 100, X.shape[0])
    Xv = np.column_stack([value, X])

    def costs(Z):
        out = np.zeros((Z.shape[0], 2, 2))
        out[:, 0, 1] = 2.0
        out[:, 1, 0] = Z[:, 0]
        out[:, 1, 1] = 2.0
        return out

    policy = CostPolicyWrapper(LogisticRegression(max_iter=500), costs=costs,
                               actions=["ship", "inspect"]).fit(Xv, y)
    p = policy.predict_proba(Xv)
    ref = bayes_actions(p, costs(Xv), actions=["ship", "inspect"])
    np.testing.assert_array_equal(policy.predict(Xv), ref)
    assert policy.cost_matrix_ is None
    # row-specific cutoffs: inspecting costs 2 either way and a missed damage costs the
    # parcel's value v, so inspect iff 2 < p v, i.e. p > 2 / v (Elkan 2001, section 2, per
    # row): expensive parcels are inspected at lower probabilities
    np.testing.assert_array_equal(policy.predict(Xv),
                                  np.where(p[:, 1] > 2.0 / value, "inspect", "ship"))
    np.testing.assert_allclose(policy.expected_costs(Xv), np.einsum("nk,nka->na", p, costs(Xv)))
    tuned = CostPolicyWrapper(LogisticRegression(max_iter=500), costs=costs, strategy="tuned",
                              random_state=0).fit(Xv, y)
    assert tuned.class_offsets_.shape == (2,)


def test_capacity_binary_heldout_exact_and_fresh_close():
    X, y = make_classification(12_000, weights=[0.8], flip_y=0.05, random_state=3)
    Xf = X[6000:]
    policy = CostPolicyWrapper(LogisticRegression(), costs=COSTS, strategy="tuned",
                               capacity=0.1, random_state=0).fit(X[:6000], y[:6000])
    curve = policy.cost_curve_
    assert curve.flagged_share[curve.admissible].max() <= 0.1
    assert np.mean(policy.predict(Xf) == 1) == pytest.approx(0.1, abs=0.02)
    bayes = CostPolicyWrapper(LogisticRegression(), costs=COSTS, capacity=0.1,
                              random_state=0).fit(X[:6000], y[:6000])
    assert bayes.cutoff_ > plugin_cutoff(COSTS)
    assert np.mean(bayes.predict(Xf) == 1) == pytest.approx(0.1, abs=0.02)


def test_capacity_multiclass_budget_on_named_action():
    X, y = make_classification(6000, n_classes=3, n_informative=4, random_state=4)
    costs = np.array([[0, 2, 5], [6, 0, 3], [25, 8, 0]], dtype=float)
    policy = CostPolicyWrapper(LogisticRegression(max_iter=500), costs=costs,
                               actions=["ship", "repack", "hold"],
                               capacity={"hold": 0.15}, random_state=0).fit(X[:3000], y[:3000])
    free = CostPolicyWrapper(LogisticRegression(max_iter=500), costs=costs,
                             actions=["ship", "repack", "hold"]).fit(X[:3000], y[:3000])
    assert np.mean(free.predict(X[3000:]) == "hold") > 0.2
    assert policy.action_budget_.binding
    assert policy.action_budget_.share <= 0.15
    assert np.mean(policy.predict(X[3000:]) == "hold") == pytest.approx(0.15, abs=0.03)


def test_scorer_with_row_costs_through_metadata_routing():
    X, y = make_classification(300, random_state=5)
    rng = np.random.default_rng(1)
    row = np.zeros((300, 2, 2))
    row[:, 0, 1] = 1.0
    row[:, 1, 0] = rng.uniform(1, 20, 300)
    scorer = make_cost_scorer({"fp": 1.0, "fn": 10.0}, classes=[0, 1])
    folds = list(StratifiedKFold(3, shuffle=True, random_state=0).split(X, y))
    with sklearn.config_context(enable_metadata_routing=True):
        scorer = scorer.set_score_request(row_costs=True)
        est = LogisticRegression()
        out = cross_validate(est, X, y, cv=folds, scoring=scorer, params={"row_costs": row})
    train, test = folds[1]
    pred = LogisticRegression().fit(X[train], y[train]).predict(X[test])
    manual = -realised_cost(y[test], pred, costs=C2, row_costs=row[test])
    assert out["test_score"][1] == pytest.approx(manual)


def test_composes_with_calibration_wrapper(cancer):
    X, y = cancer
    inner = CalibrationWrapper(_model(), method="platt", random_state=0)
    policy = CostPolicyWrapper(inner, costs=COSTS, strategy="bayes").fit(X, y)
    p = policy.predict_proba(X)
    np.testing.assert_allclose(p, policy.estimator_.predict_proba(X))
    np.testing.assert_array_equal(policy.predict(X), (p[:, 1] > 2 / 37).astype(int))
    tuned = CostPolicyWrapper(inner, costs=COSTS, strategy="tuned", cv=3, random_state=0)
    tuned.fit(X, y)
    assert 0.0 < tuned.cutoff_ < 1.0


def test_string_labels_dataframe_and_pickle():
    pd = pytest.importorskip("pandas")
    X, y = make_classification(400, random_state=6)
    df = pd.DataFrame(X, columns=[f"f{i}" for i in range(X.shape[1])])
    labels = np.where(y == 1, "damaged", "intact")  # sorted: damaged < intact
    costs = np.array([[0.0, 30.0], [2.0, 0.0]])  # rows: damaged, intact; cols: inspect, ship
    policy = CostPolicyWrapper(LogisticRegression(), costs=costs, actions=["inspect", "ship"],
                               strategy="tuned", random_state=0).fit(df, labels)
    np.testing.assert_array_equal(policy.classes_, ["damaged", "intact"])
    np.testing.assert_array_equal(policy.feature_names_in_, df.columns)
    again = pickle.loads(pickle.dumps(policy))
    np.testing.assert_array_equal(again.predict(df), policy.predict(df))
    assert set(np.unique(policy.predict(df))) <= {"inspect", "ship"}


def test_tuned_fit_on_many_rows_keeps_the_thinned_curve_and_direct_heldout_cost():
    # Consistency: beyond 20,000 held-out rows the fit searches with the curve built only at
    # the kept points and reads only the positive-class column; the cutoff, the kept curve and
    # heldout_cost_ equal the full search thinned afterwards and the cost counted row by row.
    from probwrap._cost_policy_summary import CURVE_POINTS
    from probwrap.decision._cutoff import _thin_cost_curve

    X, y = make_classification(n_samples=30_000, n_features=5, random_state=0)
    model = FrozenEstimator(LogisticRegression().fit(X[:2000], y[:2000]))
    C = np.array([[0.0, 1.0], [5.0, 0.25]])
    pol = CostPolicyWrapper(model, costs=C, strategy="tuned").fit(X, y)
    p = model.predict_proba(X)[:, 1]
    want = _thin_cost_curve(search_cutoff(p, y, C, score_bounds=(0.0, 1.0)), CURVE_POINTS)
    assert pol.cost_curve_.cutoff == want.cutoff
    # the rule kept: settled on the full curve (here the plug-in cutoff; the curve is flat)
    assert pol.cutoff_ == settle_cutoff(p, y, C).cutoff
    np.testing.assert_array_equal(pol.cost_curve_.cutoffs, want.cutoffs)
    np.testing.assert_array_equal(pol.cost_curve_.costs, want.costs)
    np.testing.assert_array_equal(pol.cost_curve_.flagged_share, want.flagged_share)
    # (dyadic costs: every sum is exact, so equality is exact)
    assert pol.heldout_cost_ == float(np.mean(C[y, (p > pol.cutoff_).astype(int)]))


def test_tuned_offsets_warn_when_many_rows_are_certain():
    # A forest on scikit-learn's wine data gives many held-out rows a probability of exactly 1
    # for one class: offsets multiply probabilities and cannot move those rows, so the tuned
    # multiclass rule says so; a logistic regression (no exact 1) does not warn.
    import warnings as _w

    from sklearn.datasets import load_wine
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import CostPolicyWrapper

    X, y = load_wine(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, stratify=y, random_state=0)
    costs = np.array([[0, 1, 1], [2, 0, 2], [3, 3, 0]], dtype=float)
    forest = RandomForestClassifier(50, random_state=0).fit(Xa, ya)
    certain = float(np.mean(forest.predict_proba(Xb).max(axis=1) == 1.0))
    assert certain >= 0.1  # the premise: many exact 1s on these rows
    with pytest.warns(UserWarning, match=r"exactly 1 for one class.*Calibrate first"):
        CostPolicyWrapper(FrozenEstimator(forest), costs=costs, strategy="tuned").fit(Xb, yb)
    logistic = make_pipeline(StandardScaler(), LogisticRegression(C=0.1)).fit(Xa, ya)
    assert np.all(logistic.predict_proba(Xb) < 1.0)
    with _w.catch_warnings():
        _w.simplefilter("error")
        CostPolicyWrapper(FrozenEstimator(logistic), costs=costs, strategy="tuned").fit(Xb, yb)
