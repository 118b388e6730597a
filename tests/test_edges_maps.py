"""Calibration maps and conversions at numeric edges.

The references: scikit-learn's ``IsotonicRegression`` (brute-force Venn-Abers refits, isotonic
levels), exact rational arithmetic with :class:`fractions.Fraction` (linear interpolation across
a tiny gap), SciPy's ``logit`` (clipped log-odds), statsmodels' GLM (calibration slope), and
mathematical identities that the maps must respect:

* weights: isotonic, beta, temperature and Platt (without smoothing) minimise a weighted mean,
  so multiplying every weight by one constant changes nothing;
* temperature: the loss depends on ``s / T`` only, so scaling every score by ``c`` scales the
  fitted temperature by ``c`` (``T(c s) = c T(s)``) and leaves the probabilities unchanged.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.special import expit, logit
from sklearn.isotonic import IsotonicRegression

from probwrap.calibration import (
    BetaMap,
    BinningMap,
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    VennAbersMap,
    proba_to_log_odds,
)
from probwrap.metrics import brier_score, calibration_slope_intercept

BINARY_MAPS = [PlattMap, BetaMap, TemperatureMap, IsotonicMap, BinningMap, VennAbersMap]


def _data(n=200, seed=0):
    rng = np.random.default_rng(seed)
    s = rng.normal(size=n)
    y = (rng.uniform(size=n) < expit(1.5 * s)).astype(int)
    return s, y


# -- weights ---------------------------------------------------------------------------------------
def _brute_venn_abers(s, y, w, test):
    """p0, p1 by refitting scikit-learn's isotonic regression with the test point added."""
    out = np.empty((len(test), 2))
    for i, t in enumerate(test):
        for label in (0, 1):
            ir = IsotonicRegression(out_of_bounds="clip").fit(
                np.append(s, t), np.append(y, label), sample_weight=np.append(w, 1.0)
            )
            out[i, label] = ir.predict([t])[0]
    return out


def test_venn_abers_with_one_overwhelming_weight_stays_finite():
    s, y = _data()
    w = np.ones_like(s)
    w[0] = 1e17  # 1e17 + 1 == 1e17 in doubles: the test point's unit weight got lost (NaN)
    m = VennAbersMap().fit(s, y, sample_weight=w)
    probe = np.concatenate([s, np.linspace(-4, 4, 81)])
    pair = m.predict_interval(probe)
    assert np.isfinite(pair).all() and np.isfinite(m.predict(probe)).all()
    assert np.all((0 <= pair) & (pair <= 1)) and np.all(pair[:, 0] <= pair[:, 1])
    # away from the heavy row, the refits by scikit-learn agree (where the heavy row's pooled
    # block is involved, both lose the unit weight to rounding in the same way)
    test = np.linspace(-3, 3, 25)
    ref = _brute_venn_abers(s, y, w, test)
    np.testing.assert_allclose(m.predict_interval(test), ref, atol=1e-6)


@pytest.mark.parametrize("cls", [IsotonicMap, BetaMap, TemperatureMap])
@pytest.mark.parametrize("big", [1e306, 1e307, 1e308])
def test_scale_free_maps_ignore_a_common_huge_weight(cls, big):
    s, y = _data()
    probe = np.linspace(-4, 4, 41)
    w = np.full(s.shape[0], big)
    # the plain (unregularised) fits minimise a weighted mean: a common weight changes nothing
    plain = {"shrinkage": 0} if cls is TemperatureMap else {"smooth_targets": False}
    ref = cls(**plain).fit(s, y).predict(probe)
    got = cls(**plain).fit(s, y, sample_weight=w).predict(probe)
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-12)
    # regularised fits count weights as rows: with ~1e308 rows per class the targets
    # (N + 1) / (N + 2) and 1 / (N + 2) are 1 and 0, a prior worth half a row weighs nothing
    # and the floor is 0 in doubles, so the default fit is the plain one
    smoothed = cls().fit(s, y, sample_weight=w)
    assert smoothed.floor_ == 0.0
    np.testing.assert_allclose(smoothed.predict(probe), ref, rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("big", [1e306, 1e308])
def test_platt_with_huge_weights(big):
    s, y = _data()
    probe = np.linspace(-4, 4, 41)
    w = np.full(s.shape[0], big)
    raw = PlattMap(smooth_targets=False).fit(s, y).predict(probe)
    np.testing.assert_allclose(
        PlattMap(smooth_targets=False).fit(s, y, sample_weight=w).predict(probe), raw, rtol=1e-9
    )
    # Platt's targets (N+ + 1) / (N+ + 2) and 1 / (N- + 2) are 1 and 0 to double precision when
    # the class weights are ~1e308 each, so the smoothed fit is the raw one
    np.testing.assert_allclose(PlattMap().fit(s, y, sample_weight=w).predict(probe), raw,
                               rtol=1e-9)


@pytest.mark.parametrize("big", [1e306, 1e308])
def test_binning_with_huge_weights(big):
    s, y = _data()
    probe = np.linspace(-4, 4, 41)
    # the prior is worth 2 rows: nothing beside rows of weight ~1e308
    # (200 rows of big / 100: the total overflows for 1e308, each bin of 20 rows does not)
    ref = BinningMap(prior_strength=0.0).fit(s, y)
    m = BinningMap().fit(s, y, sample_weight=np.full(s.shape[0], big / 100))
    np.testing.assert_array_equal(m.edges_, ref.edges_)
    np.testing.assert_allclose(m.predict(probe), ref.predict(probe), rtol=1e-12)
    np.testing.assert_allclose(m.bin_weights_, ref.bin_weights_ * (big / 100), rtol=1e-12)


def test_binning_refuses_a_bin_weight_beyond_the_largest_double():
    s, y = _data()
    with pytest.raises(ValueError, match="`sample_weight` is too large"):
        BinningMap(n_bins=2).fit(s, y, sample_weight=np.full(s.shape[0], 1e307))


def test_venn_abers_with_huge_weights_approaches_isotonic():
    s, y = _data()
    m = VennAbersMap().fit(s, y, sample_weight=np.full(s.shape[0], 1e307))
    # a unit-weight test point beside rows of weight 1e307 moves nothing: p0 = p1 = the
    # isotonic fit (scikit-learn) at each calibration score
    iso = IsotonicRegression().fit(s, y).predict(np.sort(s))
    np.testing.assert_allclose(m.p0_at_, iso, atol=1e-12)
    np.testing.assert_allclose(m.p1_at_, iso, atol=1e-12)


def test_calibration_slope_with_denormal_weights_equals_the_unweighted_fit():
    rng = np.random.default_rng(1)
    p = rng.uniform(0.05, 0.95, 100)
    y = (rng.uniform(size=100) < p).astype(int)
    got = calibration_slope_intercept(y, p, sample_weight=np.full(100, 5e-324))
    # statsmodels GLM Binomial on logit(p): the slope of Cox (1958)
    ref = sm.GLM(y, sm.add_constant(logit(p)), family=sm.families.Binomial()).fit(tol=1e-14)
    assert got.slope == pytest.approx(ref.params[1], rel=1e-8)
    assert got.slope_fit_intercept == pytest.approx(ref.params[0], abs=1e-8)


# -- scores ----------------------------------------------------------------------------------------
def test_temperature_on_huge_scores_is_the_scaled_temperature():
    s, y = _data()
    base = TemperatureMap().fit(s, y)
    for c in (2.0**600, 1e160, 1e300):
        big = TemperatureMap().fit(s * c, y)
        assert np.isfinite(big.temperature_)
        # T(c s) = c T(s): the loss depends on s / T only
        assert big.temperature_ == pytest.approx(base.temperature_ * c, rel=1e-10)
        np.testing.assert_allclose(big.predict(s * c), base.predict(s), rtol=1e-10)


def test_temperature_multiclass_on_huge_logits():
    rng = np.random.default_rng(3)
    z = rng.normal(size=(150, 3)) * 2
    y = np.argmax(z + rng.gumbel(size=z.shape), axis=1)
    base = TemperatureMap().fit(z, y)
    big = TemperatureMap().fit(z * 1e200, y)
    assert big.temperature_ == pytest.approx(base.temperature_ * 1e200, rel=1e-10)


def test_isotonic_interpolation_across_a_denormal_gap():
    m = IsotonicMap(smooth_targets=False).fit([0.0, 1e-310], [0, 1])
    np.testing.assert_array_equal(m.values_, [0.0, 1.0])
    x = [5e-324, 1e-311, 5e-311]
    # exact linear interpolation, in rational arithmetic
    ref = [float(Fraction(v) / Fraction(1e-310)) for v in x]
    np.testing.assert_allclose(m.predict(x), ref, rtol=1e-12)
    assert m.predict([5e-324])[0] == pytest.approx(4.94e-14, rel=1e-2)


def test_isotonic_interpolation_across_the_whole_double_range():
    m = IsotonicMap(smooth_targets=False).fit([-1.7e308, 1.7e308], [0, 1])
    # the gap itself overflows; the midpoint is still half-way
    np.testing.assert_allclose(m.predict([0.0, 0.85e308]), [0.5, 0.75], rtol=1e-12)


def test_clipped_log_odds_stay_finite_and_symmetric():
    out = proba_to_log_odds([0.0, 1.0 - 2.0**-53, 1.0], clip=1e-17)
    assert np.isfinite(out).all()
    # SciPy's logit of the clip: exact 0 and 1 go to -logit(1 - clip) and +logit(1 - clip)
    assert out[0] == pytest.approx(logit(1e-17), rel=1e-12)
    assert out[2] == pytest.approx(-logit(1e-17), rel=1e-12)
    assert out[1] < out[2]  # the order of the scores is kept
    np.testing.assert_array_equal(proba_to_log_odds([0.0, 0.3, 1.0]),
                                  proba_to_log_odds([0.0, 0.3, 1.0], clip=1e-12))


# -- input errors ----------------------------------------------------------------------------------
@pytest.mark.parametrize("cls", BINARY_MAPS)
def test_mixed_type_labels_name_the_argument(cls):
    labels = np.array([0, "a", 0, "a", 1], dtype=object)
    with pytest.raises(ValueError, match=r"`y` mixes label types"):
        cls().fit([0.0, 1.0, 2.0, 3.0, 4.0], labels)


def test_mixed_type_labels_in_metrics():
    with pytest.raises(ValueError, match=r"`y_true` mixes label types"):
        brier_score(np.array([0, "a", 1], dtype=object), [0.2, 0.5, 0.9])


@pytest.mark.parametrize(
    "cls, kwargs",
    [(cls, {}) for cls in BINARY_MAPS] + [(PlattMap, {"smooth_targets": False})],
    ids=[f"{cls.__name__}-default" for cls in BINARY_MAPS] + ["PlattMap-raw"],
)
def test_a_class_with_zero_total_weight_names_sample_weight(cls, kwargs):
    s = [0.0, 1.0, 2.0, 3.0]
    with pytest.raises(ValueError, match=r"`sample_weight` is zero for every row of class 1"):
        cls(**kwargs).fit(s, [0, 1, 0, 1], sample_weight=[1.0, 0.0, 1.0, 0.0])


def test_error_messages_print_plain_numbers():
    from probwrap.decision import check_capacity

    with pytest.raises(ValueError) as info:
        check_capacity(np.float64("nan"))
    assert "np.float64" not in str(info.value) and "nan" in str(info.value)


def test_predict_refuses_to_return_non_finite_probabilities(monkeypatch):
    m = PlattMap().fit(*_data())
    monkeypatch.setattr(PlattMap, "_predict", lambda self, s: np.full(s.shape, np.nan))
    with pytest.raises(ValueError, match="non-finite"):
        m.predict([0.0, 1.0])
