"""Multiclass displays: the drawn artists carry the numbers of probwrap.metrics and outside ones."""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from sklearn.calibration import calibration_curve  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402
from sklearn.pipeline import make_pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

from probwrap.datasets import make_parcels  # noqa: E402
from probwrap.metrics import expected_calibration_error, reliability_table  # noqa: E402
from probwrap.plot import (  # noqa: E402
    ActionShareDisplay,
    ClassPriorDisplay,
    ReliabilityDiagram,
    wilson_interval,
)


@pytest.fixture(scope="module")
def three():
    train = make_parcels(3000, n_outcomes=3, random_state=70)
    test = make_parcels(2500, n_outcomes=3, random_state=71)
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(train.data, train.target)
    return model, test, model.predict_proba(test.data)


def test_top_label_diagram_numbers(three):
    _, test, P = three
    y = test.target
    disp = ReliabilityDiagram.from_predictions(y, P, n_bins=10)
    ref = reliability_table(y, P, n_bins=10)
    assert disp.table.top_label and disp.class_index is None
    np.testing.assert_array_equal(disp.line_.get_xdata(), ref.mean_predicted)
    np.testing.assert_array_equal(disp.line_.get_ydata(), ref.observed_frequency)
    assert disp.calibration_error == expected_calibration_error(y, P, n_bins=10)
    # scikit-learn's calibration_curve of "top class correct" against the confidence is the
    # top-label diagram (Guo et al. 2017): same bins, same points
    correct = (P.argmax(axis=1) == y).astype(int)
    prob_true, prob_pred = calibration_curve(correct, P.max(axis=1), n_bins=10)
    np.testing.assert_allclose(disp.table.observed_frequency, prob_true)
    np.testing.assert_allclose(disp.table.mean_predicted, prob_pred)
    # Wilson intervals from the per-bin counts of correct top labels
    low, high = wilson_interval(ref.observed_frequency * ref.weight, ref.weight)
    np.testing.assert_allclose(disp.band_low, low)
    np.testing.assert_allclose(disp.band_high, high)
    heights = [b.get_height() for b in disp.bars_.patches]
    np.testing.assert_array_equal(heights, ref.weight)
    assert "top label" in disp.ax_.get_title()
    assert "confidence" in disp.hist_ax_.get_xlabel()


def test_one_vs_rest_diagram_numbers(three):
    _, test, P = three
    y = test.target
    disp = ReliabilityDiagram.from_predictions(y, P, class_index=2, n_bins=8)
    prob_true, prob_pred = calibration_curve(y == 2, P[:, 2], n_bins=8)  # scikit-learn
    np.testing.assert_allclose(disp.line_.get_ydata(), prob_true)
    np.testing.assert_allclose(disp.line_.get_xdata(), prob_pred)
    assert not disp.table.top_label and disp.class_index == 2
    assert "class 2 vs rest" in disp.ax_.get_title()
    assert np.isclose(disp.calibration_error,
                      expected_calibration_error((y == 2).astype(int), P[:, 2], n_bins=8))


def test_multiclass_from_estimator_and_labels(three):
    model, test, P = three
    names = np.array(test.target_names)
    disp = ReliabilityDiagram.from_estimator(model, test.data, test.target, n_bins=6)
    ref = reliability_table(test.target, P, n_bins=6)
    np.testing.assert_allclose(disp.table.observed_frequency, ref.observed_frequency)
    # string labels named per column give the same diagram
    by_name = ReliabilityDiagram.from_predictions(names[test.target], P, labels=names,
                                                  class_index=1, n_bins=6)
    by_index = ReliabilityDiagram.from_predictions(test.target, P, class_index=1, n_bins=6)
    np.testing.assert_array_equal(by_name.table.observed_frequency,
                                  by_index.table.observed_frequency)


def test_top_label_consistency_band(three):
    _, test, P = three
    disp = ReliabilityDiagram.from_predictions(test.target, P, n_bins=5, band="consistency",
                                               n_draws=300)
    assert disp.band_low.shape == disp.table.weight.shape
    assert np.all(disp.band_low <= disp.band_high)
    # a calibrated forecast's band covers its own mean confidence in every well-filled bin
    full = disp.table.weight > 100
    assert np.all(disp.band_low[full] <= disp.table.mean_predicted[full] + 1e-9)
    assert np.all(disp.table.mean_predicted[full] <= disp.band_high[full] + 1e-9)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"class_index": 3}, "`class_index`"),
        ({"labels": ["a", "b"]}, "`labels`"),
        ({"pos_label": 1}, "`pos_label`"),
    ],
)
def test_multiclass_bad_input(three, kwargs, match):
    _, test, P = three
    with pytest.raises(ValueError, match=match):
        ReliabilityDiagram.from_predictions(test.target, P, **kwargs)


def test_binary_rejects_class_index():
    with pytest.raises(ValueError, match="`class_index`"):
        ReliabilityDiagram.from_predictions([0, 1, 1], [0.2, 0.6, 0.9], class_index=1)


def test_action_share_display_artists():
    shares = np.array([[0.9, 0.07, 0.03], [0.5, 0.2, 0.3], [0.0, 0.0, 1.0]])
    costs = [2.25, 3.5, 12.0]
    disp = ActionShareDisplay(shares=shares, mean_cost=costs, rule_names=["a", "b", "c"],
                              action_names=["ship", "repack", "hold"], capacity=(2, 0.05)).plot()
    for j in range(3):
        widths = [p.get_width() for p in disp.segments_[j].patches]
        lefts = [p.get_x() for p in disp.segments_[j].patches]
        np.testing.assert_allclose(widths, shares[:, j])
        np.testing.assert_allclose(lefts, shares[:, :j].sum(axis=1))
    assert [t.get_text() for t in disp.cost_labels_] == ["2.250", "3.500", "12.000"]
    # capacity tick: where the hold segment would have to end, drawn inside the bars only
    ticks = disp.ax_.collections[-1].get_offsets()
    np.testing.assert_allclose(np.asarray(ticks)[:, 0], [0.7 + 0.05, 0.05])  # 1.02: outside
    with pytest.raises(ValueError, match="`shares`"):
        ActionShareDisplay(shares=shares[:, :2], mean_cost=costs, rule_names="abc",
                           action_names=["ship", "repack", "hold"])
    with pytest.raises(ValueError, match="`mean_cost`"):
        ActionShareDisplay(shares=shares, mean_cost=costs[:2], rule_names="abc",
                           action_names=["ship", "repack", "hold"])


def test_class_prior_display_artists():
    src, tgt = [0.93, 0.04, 0.03], [0.85, 0.08, 0.07]
    iv = np.array([[0.80, 0.88], [0.03, 0.14], [0.02, 0.13]])
    disp = ClassPriorDisplay(source_prior=src, target_prior=tgt, interval=iv,
                             class_names=["intact", "dented", "broken"],
                             shift_pvalue=1e-5).plot()
    np.testing.assert_allclose([b.get_height() for b in disp.source_bars_], src)
    np.testing.assert_allclose([b.get_height() for b in disp.target_bars_], tgt)
    segs = disp.interval_artist_.lines[2][0].get_segments()
    np.testing.assert_allclose([s[0][1] for s in segs], iv[:, 0])
    np.testing.assert_allclose([s[1][1] for s in segs], iv[:, 1])
    assert "p = 1e-05" in disp.ax_.get_title()
    with pytest.raises(ValueError, match="`interval`"):
        ClassPriorDisplay(source_prior=src, target_prior=tgt, interval=iv[:2])
    with pytest.raises(ValueError, match="`class_names`"):
        ClassPriorDisplay(source_prior=src, target_prior=tgt, class_names=["a"])


def test_class_prior_interval_not_containing_its_estimate_is_drawn_as_given():
    # a bootstrap percentile interval of a skewed estimator may miss the estimate itself; the
    # bar must still span the whole interval (it used to be clipped at the estimate), and the
    # reader is told
    src, tgt = [0.9, 0.06, 0.04], [0.8, 0.05, 0.15]
    iv = np.array([[0.75, 0.85], [0.06, 0.11], [0.10, 0.14]])  # classes 2 and 3 miss theirs
    with pytest.warns(UserWarning, match=r"outside its interval for 2 class\(es\).*b: 0\.05"):
        disp = ClassPriorDisplay(source_prior=src, target_prior=tgt, interval=iv,
                                 class_names=["a", "b", "c"]).plot()
    segs = disp.interval_artist_.lines[2][0].get_segments()
    np.testing.assert_allclose([s[0][1] for s in segs], iv[:, 0], rtol=1e-12)
    np.testing.assert_allclose([s[1][1] for s in segs], iv[:, 1], rtol=1e-12)
    with pytest.raises(ValueError, match="`interval` row 1 must have low <= high"):
        ClassPriorDisplay(source_prior=src, target_prior=tgt,
                          interval=[[0.7, 0.9], [0.2, 0.1], [0.1, 0.2]])
