"""Bad input to the calibration maps: each gives a clear error naming the argument."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.exceptions import NotFittedError

from probwrap.calibration import (
    NONPARAMETRIC,
    BetaMap,
    BinningMap,
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    VennAbersMap,
)

ALL_MAPS = [PlattMap, IsotonicMap, BetaMap, TemperatureMap, BinningMap, VennAbersMap]
BINARY_ONLY = [PlattMap, IsotonicMap, BetaMap, BinningMap, VennAbersMap]

S = np.array([-2.0, -1.0, -0.5, 0.0, 0.5, 1.0, 2.0, 3.0])
Y = np.array([0, 0, 1, 0, 1, 0, 1, 1])


@pytest.mark.parametrize("cls", ALL_MAPS)
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_scores_are_rejected_at_fit_and_predict(cls, bad):
    s = S.copy()
    s[3] = bad
    kind = "NaN" if np.isnan(bad) else "infinite"
    with pytest.raises(ValueError, match=rf"`scores` contains 1 {kind}"):
        cls().fit(s, Y)
    m = cls().fit(S, Y)
    with pytest.raises(ValueError, match=rf"`scores` contains 1 {kind}"):
        m.predict(s)


@pytest.mark.parametrize("cls", ALL_MAPS)
def test_mismatched_lengths(cls):
    with pytest.raises(ValueError, match=r"`y` has 7 rows but `scores` has 8"):
        cls().fit(S, Y[:-1])
    with pytest.raises(ValueError, match=r"`sample_weight` has 3 entries"):
        cls().fit(S, Y, sample_weight=[1.0, 2.0, 3.0])


@pytest.mark.parametrize("cls", BINARY_ONLY)
def test_more_than_two_labels_to_a_binary_map(cls):
    with pytest.raises(ValueError, match=r"`y` has 3 distinct labels"):
        cls().fit(S, [0, 1, 2, 0, 1, 2, 0, 1])


@pytest.mark.parametrize("cls", ALL_MAPS)
def test_a_single_class(cls):
    with pytest.raises(ValueError, match=r"`y` contains only 1 class"):
        cls().fit(S, np.ones(8))


@pytest.mark.parametrize("cls", ALL_MAPS)
def test_bad_weights(cls):
    with pytest.raises(ValueError, match=r"`sample_weight` is zero for every row"):
        cls().fit(S, Y, sample_weight=np.zeros(8))
    with pytest.raises(ValueError, match=r"`sample_weight` must be non-negative"):
        cls().fit(S, Y, sample_weight=[1, 1, 1, -1, 1, 1, 1, 1])
    with pytest.raises(ValueError, match=r"`sample_weight` contains NaN"):
        cls().fit(S, Y, sample_weight=[1, 1, 1, np.nan, 1, 1, 1, 1])


@pytest.mark.parametrize("cls", ALL_MAPS)
def test_predict_before_fit(cls):
    with pytest.raises(NotFittedError, match="not fitted"):
        cls().predict(S)


def test_venn_abers_interval_before_fit():
    with pytest.raises(NotFittedError, match="not fitted"):
        VennAbersMap().predict_interval(S)


@pytest.mark.parametrize("cls", BINARY_ONLY)
def test_two_dimensional_scores_to_a_binary_map(cls):
    z = np.column_stack([S, -S, S])
    with pytest.raises(ValueError, match=r"`scores` must be 1-d log-odds"):
        cls().fit(z, Y)
    m = cls().fit(S, Y)
    with pytest.raises(ValueError, match=r"`scores` must be 1-d log-odds"):
        m.predict(z)


@pytest.mark.parametrize("cls", ALL_MAPS)
def test_three_dimensional_or_empty_scores(cls):
    with pytest.raises(ValueError, match=r"`scores` must be 1-d \(n,\) or 2-d"):
        cls().fit(np.zeros((8, 2, 2)), Y)
    with pytest.raises(ValueError, match=r"`scores` is empty"):
        cls().fit([], [])
    with pytest.raises(ValueError, match=r"`scores` must be numeric"):
        cls().fit(["a"] * 8, Y)


@pytest.mark.filterwarnings("ignore:TemperatureMap:UserWarning")
def test_wrong_number_of_columns_at_predict():
    z = np.random.default_rng(0).normal(size=(9, 3))
    m = TemperatureMap().fit(z, [0, 1, 2] * 3)
    with pytest.raises(ValueError, match=r"`scores` has shape \(9, 4\) but the map was fitted on 3"):
        m.predict(np.zeros((9, 4)))
    with pytest.raises(ValueError, match=r"`scores` has shape \(8,\) but the map was fitted on 3"):
        m.predict(S)
    binary = TemperatureMap().fit(S, Y)
    with pytest.raises(ValueError, match=r"`scores` has shape \(9, 3\) but the map was fitted on 1-d"):
        binary.predict(z)


def test_two_column_logits_for_temperature_round_trip():
    # (n, 2) logits are a 2-class multiclass input; predict must accept the same shape
    z = np.column_stack([-S, S])
    m = TemperatureMap().fit(z, Y)
    out = m.predict(z)
    assert out.shape == (8, 2)
    # softmax of (-s, s) / T is sigmoid(2 s / T): the same map as binary scores 2 s (the same
    # temperature, prior and floor; only the floor is applied differently, clipped in the
    # binary map and clipped then renormalised for columns, so compare inside the floors)
    binary = TemperatureMap().fit(2 * S, Y)
    assert m.temperature_ == pytest.approx(binary.temperature_, rel=1e-10)
    assert m.floor_ == binary.floor_
    inside = (out[:, 1] > 2 * m.floor_) & (out[:, 1] < 1 - 2 * m.floor_)
    assert inside.sum() >= 5
    np.testing.assert_allclose(out[inside, 1], binary.predict(2 * S)[inside])


def test_more_classes_than_columns():
    with pytest.raises(ValueError, match=r"`y` has 4 classes but `scores` has 3 columns"):
        TemperatureMap().fit(np.zeros((8, 3)), [0, 1, 2, 3] * 2)


def test_nan_labels():
    with pytest.raises(ValueError, match=r"`y` contains NaN"):
        PlattMap().fit(S, [0, 1, np.nan, 0, 1, 0, 1, 1])


@pytest.mark.parametrize(
    ("estimator", "match"),
    [
        (BinningMap(n_bins=0), r"`n_bins` must be an integer >= 1"),
        (BinningMap(n_bins=2.5), r"`n_bins` must be an integer >= 1"),
        (BinningMap(prior_strength=-1.0), r"`prior_strength` must be a finite number >= 0"),
        (BinningMap(prior_strength=np.inf), r"`prior_strength` must be a finite number >= 0"),
        (PlattMap(smooth_targets="yes"), r"`smooth_targets` must be True or False"),
    ],
)
def test_bad_parameters(estimator, match):
    with pytest.raises(ValueError, match=match):
        estimator.fit(S, Y)


def test_separation_warns_and_stays_finite():
    y = (S > 0.25).astype(int)
    with pytest.warns(UserWarning, match="separate the two classes perfectly"):
        m = PlattMap(smooth_targets=False).fit(S, y)
    assert np.all(np.isfinite(m.predict(S)))
    with pytest.warns(UserWarning, match="separate the two classes perfectly"):
        b = BetaMap().fit(S, y)
    assert np.all(np.isfinite(b.predict(S)))
    assert b.boundary_ is not None  # not eligible in CalibrationWrapper(method="auto")
    with pytest.warns(UserWarning, match="end of the search range"):
        t = TemperatureMap(shrinkage=0).fit(S, y)
    assert np.all(np.isfinite(t.predict(S)))
    assert t.boundary_.startswith("temperature at the low end")
    # smoothed targets (the default) keep the temperature finite and inside the range
    smooth = TemperatureMap().fit(S, y)
    assert smooth.boundary_ is None and 0.0 < smooth.temperature_ < np.inf


def test_scores_against_the_labels_warn_in_temperature():
    # T > 0 cannot turn the order round: the best it can do is a very high temperature
    with pytest.warns(UserWarning, match="end of the search range"):
        t = TemperatureMap(shrinkage=0).fit(S, 1 - Y)
    np.testing.assert_allclose(t.predict(S), 0.5, atol=1e-5)
    # the default's prior (worth half a row of these 8) keeps T finite instead: no boundary,
    # and the output is far flatter than the scores themselves (expit(S) reaches 0.95)
    t = TemperatureMap().fit(S, 1 - Y)
    assert t.boundary_ is None
    np.testing.assert_allclose(t.predict(S), 0.5, atol=0.1)


@pytest.mark.parametrize("cls", ALL_MAPS)
def test_all_scores_equal_gives_the_base_rate(cls):
    # one distinct score: every map can only return (about) the weighted positive rate
    s = np.zeros(8)
    w = np.array([1, 1, 1, 1, 1, 1, 1, 3.0])  # weighted rate (4 - 1 + 3) / 10 = 0.6
    out = cls().fit(s, Y, sample_weight=w).predict([-1.0, 0.0, 1.0])
    assert np.all(np.isfinite(out))
    if cls in (PlattMap, IsotonicMap, BetaMap):
        # Platt's smoothed targets (the default of all three) move the rate: (6 + 1) / (6 + 2) and 1 / (4 + 2) give
        # (6 * 7/8 + 4 * 1/6) / 10
        np.testing.assert_allclose(out, (6 * 7 / 8 + 4 / 6) / 10, atol=1e-10)
    elif cls is TemperatureMap:
        # no intercept: with every score 0 the output is sigmoid(0) = 0.5 whatever T is
        assert out[1] == 0.5
    elif cls is VennAbersMap:
        # the test point (weight 1) joins the group: p0 = 6 / 11, p1 = 7 / 11
        np.testing.assert_allclose(out[1], (7 / 11) / (1 - 6 / 11 + 7 / 11))
    elif cls is BinningMap:
        # one bin, its prior (worth 2 rows) centred on the model's expit(0) = 0.5
        np.testing.assert_allclose(out, (6 + 2 * 0.5) / (10 + 2), atol=1e-10)
    else:
        np.testing.assert_allclose(out, 0.6, atol=1e-10)


def test_zero_weight_rows_act_as_absent():
    w = np.array([1, 1, 0, 1, 1, 1, 1, 1.0])
    keep = w > 0
    for cls in ALL_MAPS:
        a = cls().fit(S, Y, sample_weight=w).predict(np.linspace(-3, 4, 29))
        b = cls().fit(S[keep], Y[keep]).predict(np.linspace(-3, 4, 29))
        np.testing.assert_allclose(a, b, atol=1e-9, err_msg=cls.__name__)


@pytest.mark.filterwarnings("ignore:TemperatureMap:UserWarning")
def test_string_labels_and_clone():
    labels = np.where(Y == 1, "damaged", "fine")
    for cls in ALL_MAPS:
        m = cls().fit(S, labels)
        assert list(m.classes_) == ["damaged", "fine"]  # sorted: "fine" is the positive class
        np.testing.assert_allclose(m.predict(S), cls().fit(S, 1 - Y).predict(S))
        assert clone(m).get_params() == m.get_params()


def test_complexity_orders_the_maps():
    assert TemperatureMap.complexity < PlattMap.complexity < BetaMap.complexity
    assert BinningMap(n_bins=7).complexity == 7
    assert IsotonicMap.complexity == VennAbersMap.complexity == NONPARAMETRIC
