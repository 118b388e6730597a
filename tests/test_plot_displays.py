"""The display objects keep the numbers of probwrap.metrics / decision / shift and draw them."""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402
from sklearn.pipeline import make_pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

from probwrap import CostPolicyWrapper, PriorShiftWrapper  # noqa: E402
from probwrap.datasets import make_parcels  # noqa: E402
from probwrap.decision import cutoff_interval, plugin_cutoff, search_cutoff  # noqa: E402
from probwrap.metrics import (  # noqa: E402
    expected_calibration_error,
    net_benefit,
    net_benefit_treat_all,
    reliability_table,
)
from probwrap.plot import (  # noqa: E402
    CostCurveDisplay,
    DecisionCurveDisplay,
    PrevalenceDriftDisplay,
    ReliabilityDiagram,
    wilson_interval,
)
from probwrap.shift import PriorEstimator, prior_by_batch  # noqa: E402

COSTS = {"fp": 3.0, "fn": 40.0}


def _lr():
    return make_pipeline(StandardScaler(), LogisticRegression())


@pytest.fixture(scope="module")
def parcels():
    return make_parcels(3000, random_state=0)


@pytest.fixture(scope="module")
def model(parcels):
    return _lr().fit(parcels.data, parcels.target)


def _wrong_probs(parcels):
    # deliberately over-confident forecasts, so the diagram has something to show
    p = parcels.true_proba[:, 1]
    return 1 / (1 + np.exp(-2.0 * np.log(p / (1 - p))))


def test_reliability_numbers_and_artists(parcels):
    y, p = parcels.target, _wrong_probs(parcels)
    disp = ReliabilityDiagram.from_predictions(y, p, n_bins=8)
    ref = reliability_table(y, p, n_bins=8)
    np.testing.assert_array_equal(disp.table.mean_predicted, ref.mean_predicted)
    np.testing.assert_array_equal(disp.table.observed_frequency, ref.observed_frequency)
    assert disp.calibration_error == expected_calibration_error(y, p, n_bins=8)
    low, high = wilson_interval(ref.observed_frequency * ref.weight, ref.weight)
    np.testing.assert_allclose(disp.band_low, low)
    np.testing.assert_allclose(disp.band_high, high)
    # drawn data equal the numbers
    np.testing.assert_array_equal(disp.line_.get_xdata(), ref.mean_predicted)
    np.testing.assert_array_equal(disp.line_.get_ydata(), ref.observed_frequency)
    heights = [bar.get_height() for bar in disp.bars_]
    np.testing.assert_array_equal(heights, ref.weight)
    # error bar segments run from the Wilson low to the Wilson high
    segs = disp.band_artist_.lines[2][0].get_segments()
    np.testing.assert_allclose([s[0][1] for s in segs], low)
    np.testing.assert_allclose([s[1][1] for s in segs], high)
    assert disp.ax_.figure is disp.figure_ and disp.hist_ax_.figure is disp.figure_


def test_reliability_consistency_band_drawn(parcels):
    y, p = parcels.target, parcels.true_proba[:, 1]
    disp = ReliabilityDiagram.from_predictions(
        y, p, n_bins=5, band="consistency", n_draws=300, random_state=0
    )
    assert disp.band == "consistency"
    assert np.all(disp.band_low <= disp.table.mean_predicted + 1e-12)
    assert np.all(disp.band_high >= disp.table.mean_predicted - 1e-12)
    # the polygon spans exactly the band at the first bin's x
    verts = disp.band_artist_.get_paths()[0].vertices
    at_first = verts[np.isclose(verts[:, 0], disp.table.mean_predicted[0])][:, 1]
    assert np.isclose(at_first.min(), disp.band_low[0])
    assert np.isclose(at_first.max(), disp.band_high[0])


def test_reliability_from_estimator_uses_predict_proba(parcels, model):
    disp = ReliabilityDiagram.from_estimator(model, parcels.data, parcels.target, n_bins=6)
    ref = reliability_table(parcels.target, model.predict_proba(parcels.data)[:, 1], n_bins=6)
    np.testing.assert_array_equal(disp.table.observed_frequency, ref.observed_frequency)
    assert disp.line_.get_label() == "Pipeline"


def test_reliability_on_given_axes():
    from matplotlib.figure import Figure

    ax = Figure().add_subplot()
    disp = ReliabilityDiagram.from_predictions([0, 1, 0, 1], [0.1, 0.8, 0.3, 0.6], n_bins=2,
                                               ax=ax)
    assert disp.ax_ is ax


def test_reliability_bad_band():
    with pytest.raises(ValueError, match="`band`"):
        ReliabilityDiagram.from_predictions([0, 1], [0.2, 0.7], band="stripes")


def test_cost_curve_numbers_and_artists(parcels):
    y, p = parcels.target, _wrong_probs(parcels)
    disp = CostCurveDisplay.from_predictions(y, p, COSTS, n_resamples=30, random_state=0)
    ref = search_cutoff(p, y, COSTS, score_bounds=(0, 1))
    np.testing.assert_array_equal(disp.cutoffs, ref.cutoffs)
    np.testing.assert_array_equal(disp.costs, ref.costs)
    assert disp.cutoff == ref.cutoff and disp.cost == ref.cost
    iv = cutoff_interval(p, y, COSTS, score_bounds=(0, 1), n_resamples=30, random_state=0)
    assert (disp.interval.low, disp.interval.high) == (iv.low, iv.high)
    assert disp.plugin_cutoff == plugin_cutoff(COSTS)
    np.testing.assert_array_equal(disp.line_.get_xdata(), ref.cutoffs)
    np.testing.assert_array_equal(disp.line_.get_ydata(), ref.costs)
    assert disp.chosen_line_.get_xdata()[0] == ref.cutoff
    assert disp.plugin_line_.get_xdata()[0] == plugin_cutoff(COSTS)
    patch = disp.interval_patch_  # a Rectangle in data x (matplotlib >= 3.9)
    assert np.isclose(patch.get_x(), iv.low)
    assert np.isclose(patch.get_x() + patch.get_width(), iv.high)
    # cost of the 0.5 and plug-in cutoffs: mean realised cost, computed here by hand
    c_half = np.where(p > 0.5, np.where(y == 1, 0.0, 3.0), np.where(y == 1, 40.0, 0.0)).mean()
    assert np.isclose(disp.half_cost, c_half)
    t = plugin_cutoff(COSTS)
    c_plug = np.where(p > t, np.where(y == 1, 0.0, 3.0), np.where(y == 1, 40.0, 0.0)).mean()
    assert np.isclose(disp.plugin_cost, c_plug)
    assert disp.cost <= min(c_half, c_plug) + 1e-12


def test_cost_curve_capacity_greys_out_inadmissible(parcels):
    y, p = parcels.target, parcels.true_proba[:, 1]
    disp = CostCurveDisplay.from_predictions(y, p, COSTS, capacity=0.05, n_resamples=0)
    ref = search_cutoff(p, y, COSTS, capacity=0.05, score_bounds=(0, 1))
    drawn = disp.line_.get_ydata()
    assert np.all(np.isnan(drawn[~ref.admissible]))
    np.testing.assert_array_equal(drawn[ref.admissible], ref.costs[ref.admissible])
    assert disp.cutoff == ref.cutoff and disp.interval is None


def test_cost_curve_from_predictions_marks_the_tuned_policys_cutoff():
    # the settled cutoff drawn for scores is the one CostPolicyWrapper(strategy="tuned") keeps
    # on the same rows: naive Bayes' probabilities from scikit-learn's breast cancer data, which
    # a map fitted on the rows recalibrates (so the plain plug-in cutoff is not the anchor)
    from sklearn.datasets import load_breast_cancer
    from sklearn.frozen import FrozenEstimator
    from sklearn.naive_bayes import GaussianNB

    from probwrap._column_models import ProbabilityColumn

    X, yc = load_breast_cancer(return_X_y=True)
    yc = (yc == 0).astype(int)
    idx = np.random.default_rng(0).permutation(len(yc))
    p = GaussianNB().fit(X[idx[:50]], yc[idx[:50]]).predict_proba(X[idx[50:150]])[:, 1]
    y = yc[idx[50:150]]
    costs = {"fp": 1.0, "fn": 10.0}
    disp = CostCurveDisplay.from_predictions(y, p, costs, n_resamples=0, random_state=0)
    pol = CostPolicyWrapper(FrozenEstimator(ProbabilityColumn().fit()), costs=costs,
                            strategy="tuned", random_state=0).fit(p[:, None], y)
    assert pol.cutoff_anchor_map_ not in (None, "identity")
    assert disp.settled_cutoff == pol.cutoff_


def test_cost_curve_from_fitted_policy(parcels):
    policy = CostPolicyWrapper(
        _lr(), costs=COSTS, strategy="tuned", cv=3,
        random_state=0, n_resamples=20,
    ).fit(parcels.data, parcels.target)
    disp = CostCurveDisplay.from_estimator(policy)
    assert disp.result is policy.cost_curve_
    assert disp.cutoff == policy.cost_curve_.cutoff
    assert disp.settled_cutoff == policy.cutoff_
    assert disp.interval.low == policy.cutoff_interval_.low
    np.testing.assert_array_equal(disp.line_.get_ydata(), policy.cost_curve_.costs)
    # with rows: evaluated on them with the wrapper's costs
    disp2 = CostCurveDisplay.from_estimator(policy, parcels.data, parcels.target,
                                            n_resamples=0)
    ref = search_cutoff(policy.predict_proba(parcels.data)[:, 1], parcels.target,
                        policy.cost_matrix_, score_bounds=(0, 1))
    np.testing.assert_array_equal(disp2.costs, ref.costs)


def test_cost_curve_from_estimator_without_curve(model):
    with pytest.raises(ValueError, match="cost_curve_"):
        CostCurveDisplay.from_estimator(model)


def test_decision_curve_numbers_and_artists(parcels, model):
    y, p = parcels.target, model.predict_proba(parcels.data)[:, 1]
    t = np.linspace(0.02, 0.5, 25)
    disp = DecisionCurveDisplay.from_predictions(y, p, thresholds=t)
    np.testing.assert_array_equal(disp.net_benefit, net_benefit(y, p, t))
    np.testing.assert_array_equal(disp.treat_all, net_benefit_treat_all(y, t))
    np.testing.assert_array_equal(disp.line_.get_ydata(), net_benefit(y, p, t))
    np.testing.assert_array_equal(disp.treat_all_line_.get_ydata(), net_benefit_treat_all(y, t))
    np.testing.assert_array_equal(disp.treat_none_line_.get_ydata(), np.zeros_like(t))
    np.testing.assert_array_equal(disp.line_.get_xdata(), t)
    est = DecisionCurveDisplay.from_estimator(model, parcels.data, parcels.target, thresholds=t)
    np.testing.assert_array_equal(est.net_benefit, disp.net_benefit)


def test_decision_curve_marks_policy_cutoff(parcels):
    policy = CostPolicyWrapper(_lr(), costs=COSTS).fit(
        parcels.data, parcels.target
    )
    disp = DecisionCurveDisplay.from_estimator(policy, parcels.data, parcels.target)
    assert disp.marked_line_.get_xdata()[0] == policy.cutoff_ == plugin_cutoff(COSTS)


def test_prevalence_numbers_and_artists(parcels):
    proba = parcels.true_proba
    est = PriorEstimator(n_resamples=20, random_state=0).fit(proba[:1500], parcels.target[:1500])
    winter = make_parcels(1200, season="winter", random_state=5)
    # winter parcels scored with the summer probabilities: re-weight the true winter
    # probabilities back by the prior ratio
    src = parcels.source_prior
    back = winter.true_proba * (src / winter.prior)
    back /= back.sum(axis=1, keepdims=True)
    # alpha 0.05: 400-row batches, and the shift test carries the labelled rows' error too
    disp = PrevalenceDriftDisplay.from_predictions(back, est, batch_size=400, alpha=0.05)
    ref = prior_by_batch(est, back, batch_size=400)
    np.testing.assert_allclose(disp.prevalence, ref["prior"][:, 1])
    np.testing.assert_allclose(disp.lower, ref["lower"][:, 1])
    np.testing.assert_array_equal(disp.line_.get_ydata(), disp.prevalence)
    np.testing.assert_array_equal(disp.line_.get_xdata(), [0, 1, 2])
    assert disp.source_line_.get_ydata()[0] == est.source_prior_[1]
    assert np.all(disp.prevalence > est.source_prior_[1])  # winter doubles damage
    assert disp.flagged.any() and disp.flag_points_ is not None


def test_prevalence_from_wrapper_monitor(parcels):
    wrapper = PriorShiftWrapper(_lr(), cv=3, n_resamples=10,
                                random_state=0).fit(parcels.data, parcels.target)
    winter = make_parcels(900, season="winter", random_state=6)
    disp = PrevalenceDriftDisplay.from_estimator(wrapper, winter.data, batch_size=300)
    assert disp.prevalence.shape == (3,)
    assert disp.source_prevalence == wrapper.source_prior_[1]
    with pytest.raises(ValueError, match="`table`"):
        PrevalenceDriftDisplay(table=np.zeros(3))
    with pytest.raises(ValueError, match="PriorShiftWrapper"):
        PrevalenceDriftDisplay.from_estimator(LogisticRegression(), winter.data, batch_size=3)


def test_plot_package_does_not_import_matplotlib_at_import():
    import subprocess
    import sys

    code = "import sys, probwrap.plot, probwrap.report; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == "False"
    code = ("import sys, probwrap, probwrap.metrics, probwrap.decision, probwrap.shift;"
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == "False"
