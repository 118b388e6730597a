"""The multiclass / multi-action report: its numbers equal the library's and outside references."""

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper, PriorShiftWrapper
from probwrap.datasets import make_parcels
from probwrap.decision import (
    budget_actions,
    expected_costs,
    fit_action_budget,
    realised_cost,
)
from probwrap.metrics import (
    brier_score,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
)
from probwrap.report import CAUTIONS, MulticlassReportContent, write_report
from probwrap.shift import PriorEstimator, adjust_to_prior

ACTIONS = ["ship", "repack", "hold"]
# rows intact / dented / broken; columns ship / repack / hold (invented scenario costs)
COSTS3 = np.array([[0.0, 4.0, 12.0], [20.0, 4.0, 12.0], [60.0, 64.0, 12.0]])
CAP = 0.03  # hold area: at most 3% of parcels (binds: the Bayes rule holds about 5%)
N_RES = 30


@pytest.fixture(scope="module")
def three():
    train = make_parcels(3000, n_outcomes=3, random_state=40)
    test = make_parcels(2000, n_outcomes=3, random_state=41)
    winter = make_parcels(1500, n_outcomes=3, season="winter", random_state=42)
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(train.data, train.target)
    return {
        "train": train, "test": test, "winter": winter, "model": model,
        "y": test.target, "P": model.predict_proba(test.data),
        "Q": model.predict_proba(winter.data),
    }


@pytest.fixture(scope="module")
def report(three, tmp_path_factory, report_page_parser):
    # the same page parser as the binary tests (tests/test_report_structure.py)
    _Page = report_page_parser._Page
    path = tmp_path_factory.mktemp("mc") / "report.html"
    content = write_report(
        path, y_true=three["y"], y_prob=three["P"], costs=COSTS3, action_names=ACTIONS,
        capacity={"hold": CAP}, unlabelled_prob=three["Q"], n_resamples=N_RES,
        class_names=three["train"].target_names, random_state=0,
    )
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    return content, page


def _onehot(y, k):
    return np.eye(k)[y]


def test_sections_figures_and_cautions(report):
    content, page = report
    assert isinstance(content, MulticlassReportContent)
    assert page.sections == ["calibration", "decisions", "prevalence", "cautions"]
    assert [f["id"] for f in page.figures] == ["fig-reliability", "fig-actions",
                                               "fig-class-prior"]
    for fig in page.figures:
        assert fig["svg"] == 1 and fig["paths"] > 20, fig
    for caution in CAUTIONS:
        assert caution in page.text
    assert "intact" in page.text and "hold" in page.text


def test_calibration_numbers_match_library_and_references(three, report, report_page_parser):
    _val = report_page_parser._val
    y, P = three["y"], three["P"]
    _, page = report
    ll = _val(page.rows["log_loss"][0])
    assert np.isclose(ll, log_loss(y, P), rtol=1e-12)
    assert np.isclose(ll, sk_log_loss(y, P, labels=[0, 1, 2]), rtol=1e-9)  # scikit-learn
    br = _val(page.rows["brier"][0])
    assert np.isclose(br, brier_score(y, P), rtol=1e-12)
    # Brier (1950), original multi-category form: mean over rows of sum_k (p_k - [y = k])^2
    assert np.isclose(br, np.mean(np.sum((P - _onehot(y, 3)) ** 2, axis=1)))
    m = {row.key: row for row in report[0].metrics}
    top = m["ece_top"].plain_value
    assert np.isclose(top, expected_calibration_error(y, P, n_bins=10), rtol=1e-12)
    # Guo et al. (2017, eq. 3): bins of the confidence, |accuracy - confidence| weighted by size
    conf, correct = P.max(axis=1), (P.argmax(axis=1) == y).astype(float)
    b = np.minimum((conf * 10).astype(int), 9)
    ref = sum(np.sum(b == i) / len(y) * abs(correct[b == i].mean() - conf[b == i].mean())
              for i in np.unique(b))
    assert np.isclose(top, ref)
    cw = m["ece_classwise"].plain_value
    assert np.isclose(cw, classwise_calibration_error(y, P, n_bins=10), rtol=1e-12)
    # every interval contains the value shown (for the binned errors: the bias-corrected value
    # with the basic bootstrap interval)
    for key in ("log_loss", "brier", "ece_top", "ece_classwise"):
        value, low, high = (_val(page.rows[key][i]) for i in range(3))
        assert low < high and low <= value <= high, key
    # class shares of the labelled rows
    for j in range(3):
        assert np.isclose(_val(page.rows[f"class:{j}"][0]), np.mean(y == j))


def test_decision_numbers_match_library(three, report, report_page_parser):
    _val = report_page_parser._val
    y, P = three["y"], three["P"]
    content, page = report
    rows = np.arange(y.shape[0])
    E = P @ COSTS3
    # Bayes actions: argmin of expected cost, realised cost C[y, a]
    bayes = np.argmin(E, axis=1)
    assert np.isclose(_val(page.rows["bayes"][0]), COSTS3[y, bayes].mean())
    for j in range(3):
        assert np.isclose(_val(page.rows["bayes"][1 + j]), np.mean(bayes == j))
    assert np.mean(bayes == 2) > CAP  # the capacity binds
    # chosen: the Bayes rule filled within the hold capacity
    budget = fit_action_budget(expected_costs(P, COSTS3), 2, CAP)
    chosen = budget_actions(E, 2, budget.saving_threshold)
    assert np.isclose(_val(page.rows["chosen"][0]),
                      realised_cost(y, chosen, costs=COSTS3, classes=[0, 1, 2],
                                    actions=[0, 1, 2]))
    assert np.isclose(_val(page.rows["chosen"][0]), COSTS3[y, chosen].mean())
    assert _val(page.rows["chosen"][3]) <= CAP
    assert np.isclose(_val(page.ids["budget-threshold"]["data-value"]), budget.saving_threshold)
    assert np.isclose(_val(page.ids["capacity"]["data-value"]), CAP)
    # alternatives: best action as if the most probable class were certain, one action for
    # every row (the actions are not the classes, so "most probable class as action" is absent)
    assert "argmax" not in page.rows
    arg = P.argmax(axis=1)
    assert np.isclose(_val(page.rows["certain"][0]), COSTS3[y, COSTS3[arg].argmin(axis=1)].mean())
    for j in range(3):
        assert np.isclose(_val(page.rows[f"all:{j}"][0]), COSTS3[y, j].mean())
    # cost matrix cells
    for i in range(3):
        assert [_val(v) for v in page.rows[f"cost:{i}"]] == COSTS3[i].tolist()
    # unlabelled rows: expected cost under posteriors moved to the estimated priors
    Q = three["Q"]
    # (the shares the evidence gate applies, as PriorShiftWrapper would)
    src, tgt = content.source_prior, content.applied_prior
    Eq = adjust_to_prior(Q, src, tgt) @ COSTS3
    qb = np.argmin(Q @ COSTS3, axis=1)
    assert np.isclose(_val(page.rows["bayes"][-1]), Eq[np.arange(Q.shape[0]), qb].mean())
    adapted = np.argmin(Eq, axis=1)
    assert np.isclose(_val(page.rows["adapted"][-1]), Eq[np.arange(Q.shape[0]), adapted].mean())
    moved = np.argmin(adjust_to_prior(P, src, tgt) @ COSTS3, axis=1)
    assert np.isclose(_val(page.rows["adapted"][0]), COSTS3[y, moved].mean())
    assert rows.shape[0] == content.n_rows


def test_prior_numbers_match_library(three, report, report_page_parser):
    _val = report_page_parser._val
    y, P, Q = three["y"], three["P"], three["Q"]
    content, page = report
    res = PriorEstimator(n_resamples=0).fit(P, y).estimate(Q)
    for j in range(3):
        cells = [_val(v) for v in page.rows[f"prior:{j}"]]
        assert np.isclose(cells[0], np.mean(y == j))
        # the maximum-likelihood shares with their own interval, then the shrunk shares the
        # rules use (the two differ here: 20 pseudo-rows against a few hundred unlabelled rows)
        assert np.isclose(cells[1], res.ml_prior[j], atol=1e-6)
        assert cells[2] <= res.ml_prior[j] <= cells[3]
        assert np.isclose(cells[4], res.prior[j], atol=1e-6)
    assert np.isclose(_val(page.rows["shift_pvalue"][0]), res.shift_pvalue, rtol=1e-6)
    assert np.isclose(_val(page.rows["shift_statistic"][0]), res.shift_statistic, rtol=1e-6)
    # winter: both damage outcomes roughly double
    assert res.prior[1] > np.mean(y == 1) and res.prior[2] > np.mean(y == 2)
    assert res.shift_pvalue < 0.01


def test_report_from_fitted_multiclass_wrappers(three, tmp_path, report_page_parser):
    _Page, _val = report_page_parser._Page, report_page_parser._val
    train, test, winter = three["train"], three["test"], three["winter"]
    base = make_pipeline(StandardScaler(), LogisticRegression())
    policy = CostPolicyWrapper(base, costs=COSTS3, strategy="tuned", actions=ACTIONS,
                               capacity={"hold": CAP}, cv=3, random_state=0).fit(
        train.data, train.target)
    shift = PriorShiftWrapper(base, cv=3, n_resamples=20, random_state=0).fit(
        train.data, train.target)
    shift.adapt(winter.data)
    path = tmp_path / "wrapped.html"
    content = write_report(path, model=policy, X=test.data, y=test.target,
                           X_unlabelled=winter.data, prior_shift=shift, n_resamples=10)
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    assert content.action_names == tuple(ACTIONS)
    assert np.isclose(_val(page.rows["chosen"][0]),
                      realised_cost(test.target, policy.predict(test.data), costs=COSTS3,
                                    classes=[0, 1, 2], actions=ACTIONS))
    for j in range(3):
        assert np.isclose(_val(page.rows[f"offset:{j}"][0]), policy.class_offsets_[j])
        # maximum-likelihood share, its interval, the shrunk share, then the share the
        # wrapper applies after its evidence gate
        assert np.isclose(_val(page.rows[f"prior:{j}"][1]), shift.prior_estimate_.ml_prior[j])
        assert np.isclose(_val(page.rows[f"prior:{j}"][-2]), shift.target_prior_[j])
        assert np.isclose(_val(page.rows[f"prior:{j}"][-1]), shift.applied_prior_[j])
    assert np.isclose(_val(page.ids["budget-threshold"]["data-value"]),
                      policy.action_budget_.saving_threshold)
    assert content.shift_pvalue == shift.shift_pvalue_
    # the policy's actions on the unlabelled rows, costed under the moved posteriors
    Eq = adjust_to_prior(policy.predict_proba(winter.data), content.source_prior,
                         shift.applied_prior_) @ COSTS3
    acts = np.array([ACTIONS.index(a) for a in policy.predict(winter.data)])
    assert np.isclose(content.rules[0].target_expected_cost,
                      Eq[np.arange(acts.shape[0]), acts].mean())


def test_per_parcel_costs_from_a_policy(tmp_path):
    from sklearn.compose import ColumnTransformer

    def parcel_costs(X):
        value = X["parcel_value"].to_numpy(dtype=float)
        out = np.empty((value.shape[0], 3, 3))
        out[:, 0, :] = [0.0, 4.0, 12.0]
        out[:, 1, :] = np.column_stack([0.3 * value + 5.0, np.full_like(value, 4.0),
                                        np.full_like(value, 12.0)])
        out[:, 2, :] = np.column_stack([value + 8.0, value + 12.0, np.full_like(value, 12.0)])
        return out

    def frame(seed):
        b = make_parcels(1500, n_outcomes=3, random_state=seed, as_frame=True)
        X = b.data.copy()
        X["parcel_value"] = b.parcel_value
        return X, b.target

    X, y = frame(50)
    Xt, yt = frame(51)
    features = [c for c in X.columns if c != "parcel_value"]
    model = make_pipeline(ColumnTransformer([("f", StandardScaler(), features)]),
                          LogisticRegression())
    policy = CostPolicyWrapper(model, costs=parcel_costs, actions=ACTIONS).fit(X, y)
    content = write_report(tmp_path / "values.html", model=policy, X=Xt, y=yt, n_resamples=10)
    per_row = parcel_costs(Xt)
    assert content.per_row_costs
    np.testing.assert_allclose(content.cost_matrix, per_row.mean(axis=0))
    rows = np.arange(yt.shape[0])
    bayes = np.argmin(np.einsum("nk,nka->na", policy.predict_proba(Xt), per_row), axis=1)
    rules = {r.key: r for r in content.rules}
    assert np.isclose(rules["bayes"].mean_cost, per_row[rows, yt, bayes].mean())
    assert np.isclose(rules["all:2"].mean_cost, 12.0)


def test_binary_with_a_reject_action(tmp_path):
    parcels = make_parcels(1500, random_state=60)
    p = parcels.true_proba[:, 1]
    y = parcels.target
    costs = [[0.0, 3.0, 1.0], [40.0, 3.0, 1.0]]  # ship / inspect / refer to a person
    content = write_report(tmp_path / "reject.html", y_true=y, y_prob=p, costs=costs,
                           action_names=["ship", "inspect", "refer"], n_resamples=10)
    rules = {r.key: r for r in content.rules}
    assert "argmax" not in rules  # actions are not the classes
    C = np.asarray(costs)
    bayes = np.argmin(np.column_stack([1 - p, p]) @ C, axis=1)
    assert np.isclose(rules["chosen"].mean_cost, C[y, bayes].mean())
    np.testing.assert_allclose(rules["chosen"].shares, np.bincount(bayes, minlength=3) / len(y))


def test_actions_equal_to_classes(three, tmp_path):
    """A square matrix without action names: the actions are the classes."""
    y, P = three["y"], three["P"]
    costs = np.array([[0.0, 1.0, 1.0], [5.0, 0.0, 1.0], [20.0, 4.0, 0.0]])
    content = write_report(tmp_path / "sq.html", y_true=y, y_prob=P, costs=costs,
                           n_resamples=10)
    assert content.action_names == ("0", "1", "2")
    rules = {r.key: r for r in content.rules}
    arg = P.argmax(axis=1)
    assert np.isclose(rules["argmax"].mean_cost, costs[y, arg].mean())
    np.testing.assert_allclose(rules["argmax"].shares, np.bincount(arg, minlength=3) / len(y))
    bayes = np.argmin(P @ costs, axis=1)
    assert np.isclose(rules["chosen"].mean_cost, costs[y, bayes].mean())
    assert rules["chosen"].mean_cost <= rules["argmax"].mean_cost + 0.05


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"costs": COSTS3[:2]}, "`costs`"),
        ({"costs": COSTS3, "action_names": ["ship", "hold"]}, "`action_names`"),
        ({"costs": COSTS3, "action_names": ["a", "a", "b"]}, "`action_names`"),
        ({"costs": COSTS3, "action_names": ACTIONS, "capacity": 0.1}, "`capacity`"),
        ({"costs": COSTS3, "action_names": ACTIONS, "capacity": {"drop": 0.1}}, "`capacity`"),
        ({"costs": {"fp": 1.0, "fn": 5.0}}, "`costs`"),
        ({"row_costs": np.zeros((5, 3, 3))}, "`row_costs`"),
        ({"class_names": ["a", "b"]}, "`class_names`"),
    ],
)
def test_bad_input_names_argument(tmp_path, kwargs, match):
    y = np.array([0, 1, 2, 0, 1, 2])
    P = np.array([[0.7, 0.2, 0.1], [0.2, 0.6, 0.2], [0.1, 0.2, 0.7]] * 2)
    with pytest.raises(ValueError, match=match):
        write_report(tmp_path / "x.html", y_true=y, y_prob=P, n_resamples=5, **kwargs)
    assert not (tmp_path / "x.html").exists()


def test_bad_probabilities_name_argument(tmp_path):
    y = np.array([0, 1, 2])
    with pytest.raises(ValueError, match="`y_prob`.*sum to one"):
        write_report(tmp_path / "x.html", y_true=y, y_prob=[[0.5, 0.5, 0.5]] * 3)
    with pytest.raises(ValueError, match="`y_true`"):
        write_report(tmp_path / "x.html", y_true=[0, 1, 7, 8],
                     y_prob=[[0.5, 0.3, 0.2]] * 4)
