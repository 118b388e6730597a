"""Property tests (hypothesis) shared by every calibration map."""

from __future__ import annotations

import pickle

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from probwrap.calibration import (
    BetaMap,
    BinningMap,
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    VennAbersMap,
)

SETTINGS = settings(max_examples=40, deadline=None)

ALL_MAPS = [PlattMap, IsotonicMap, BetaMap, TemperatureMap, BinningMap, VennAbersMap]
MONOTONE_MAPS = [IsotonicMap, BetaMap, TemperatureMap, VennAbersMap]

# Extreme rows with both labels at both ends keep every problem away from perfect separation,
# so the parametric maps have a finite maximum-likelihood fit.
_ANCHOR_S = np.array([-25.0, -25.0, 25.0, 25.0])
_ANCHOR_Y = np.array([0.0, 1.0, 0.0, 1.0])


@st.composite
def binary_data(draw, min_size=2, max_size=40):
    n = draw(st.integers(min_size, max_size))
    # a coarse grid of scores (quarters) makes ties common
    s = np.array(draw(st.lists(st.integers(-80, 80), min_size=n, max_size=n)), dtype=float) / 4
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)), dtype=float)
    w = np.array(draw(st.lists(st.integers(1, 3), min_size=n, max_size=n)), dtype=float)
    s = np.concatenate([s, _ANCHOR_S])
    y = np.concatenate([y, _ANCHOR_Y])
    w = np.concatenate([w, np.ones(4)])
    return s, y, w


@st.composite
def multiclass_data(draw):
    k = draw(st.integers(2, 5))
    n = draw(st.integers(k, 30))
    z = np.array(
        draw(st.lists(st.floats(-8, 8, allow_nan=False), min_size=n * k, max_size=n * k))
    ).reshape(n, k)
    y = np.array(draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n)))
    y[:k] = np.arange(k)  # every class present
    w = np.array(draw(st.lists(st.integers(1, 3), min_size=n, max_size=n)), dtype=float)
    return z, y, w


GRID = np.linspace(-40, 40, 801)


def _fit(cls, s, y, w=None):
    return cls().fit(s, y, sample_weight=w)


@pytest.mark.filterwarnings("ignore::UserWarning")
@pytest.mark.parametrize("cls", MONOTONE_MAPS)
@SETTINGS
@given(data=binary_data())
def test_monotone_maps_are_non_decreasing(cls, data):
    s, y, w = data
    out = _fit(cls, s, y, w).predict(GRID)
    assert np.all(np.diff(out) >= -1e-12)


@pytest.mark.filterwarnings("ignore::UserWarning")
@SETTINGS
@given(data=binary_data())
def test_platt_is_monotone_in_the_direction_of_its_slope(data):
    s, y, w = data
    m = PlattMap().fit(s, y, sample_weight=w)
    d = np.diff(m.predict(GRID)) * np.sign(m.slope_)
    assert np.all(d >= -1e-12)


@pytest.mark.filterwarnings("ignore::UserWarning")
@SETTINGS
@given(data=binary_data())
def test_venn_abers_interval_is_ordered_and_contains_the_merged_value(data):
    s, y, w = data
    m = VennAbersMap().fit(s, y, sample_weight=w)
    pair = m.predict_interval(GRID)
    p = m.predict(GRID)
    assert np.all(pair[:, 0] <= pair[:, 1] + 1e-12)
    assert np.all((pair[:, 0] - 1e-12 <= p) & (p <= pair[:, 1] + 1e-12))
    assert np.all(np.diff(pair, axis=0) >= -1e-12)  # both ends non-decreasing in the score


@pytest.mark.filterwarnings("ignore::UserWarning")
@pytest.mark.parametrize("cls", ALL_MAPS)
@SETTINGS
@given(data=binary_data())
def test_outputs_are_finite_probabilities(cls, data):
    s, y, w = data
    out = _fit(cls, s, y, w).predict(np.concatenate([GRID, [-1e6, 1e6]]))
    assert out.shape == (GRID.shape[0] + 2,)
    assert np.all(np.isfinite(out)) and np.all((out >= 0) & (out <= 1))


@pytest.mark.filterwarnings("ignore::UserWarning")
@SETTINGS
@given(data=multiclass_data())
def test_temperature_multiclass_rows_sum_to_one_and_keep_the_order(data):
    z, y, w = data
    m = TemperatureMap().fit(z, y, sample_weight=w)
    out = m.predict(z * 3.0)
    assert np.all(np.isfinite(out))
    np.testing.assert_allclose(out.sum(axis=1), 1.0, atol=1e-12)
    # dividing by one positive temperature keeps the order of the classes within each row
    order_in = np.argsort(z, axis=1, kind="stable")
    assert np.all(np.diff(np.take_along_axis(out, order_in, axis=1), axis=1) >= -1e-12)


@pytest.mark.filterwarnings("ignore::UserWarning")
@pytest.mark.parametrize("cls", ALL_MAPS)
@SETTINGS
@given(data=binary_data(), seed=st.integers(0, 2**32 - 1))
def test_row_order_does_not_matter(cls, data, seed):
    s, y, w = data
    perm = np.random.default_rng(seed).permutation(s.shape[0])
    a = _fit(cls, s, y, w).predict(GRID)
    b = _fit(cls, s[perm], y[perm], w[perm]).predict(GRID)
    np.testing.assert_allclose(a, b, atol=1e-8)


@pytest.mark.filterwarnings("ignore::UserWarning")
@pytest.mark.parametrize("cls", ALL_MAPS)
@SETTINGS
@given(data=binary_data(), pick=st.integers(0, 10**6))
def test_weight_two_equals_a_duplicated_row(cls, data, pick):
    s, y, w = data
    w = np.ones_like(s)
    i = pick % s.shape[0]
    w2 = w.copy()
    w2[i] = 2.0
    weighted = _fit(cls, s, y, w2).predict(GRID)
    dup = _fit(cls, np.append(s, s[i]), np.append(y, y[i]), None).predict(GRID)
    np.testing.assert_allclose(weighted, dup, atol=1e-8)


@pytest.mark.filterwarnings("ignore::UserWarning")
@SETTINGS
@given(data=multiclass_data(), pick=st.integers(0, 10**6))
def test_temperature_multiclass_weight_two_equals_duplicate(data, pick):
    z, y, _ = data
    i = pick % z.shape[0]
    w2 = np.ones(z.shape[0])
    w2[i] = 2.0
    a = TemperatureMap().fit(z, y, sample_weight=w2)
    b = TemperatureMap().fit(np.vstack([z, z[i]]), np.append(y, y[i]))
    np.testing.assert_allclose(a.predict(z), b.predict(z), atol=1e-8)


@pytest.mark.filterwarnings("ignore::UserWarning")
@pytest.mark.parametrize("cls", ALL_MAPS)
@settings(max_examples=15, deadline=None)
@given(data=binary_data())
def test_inputs_are_not_modified(cls, data):
    s, y, w = data
    copies = [s.copy(), y.copy(), w.copy()]
    for arr in (s, y, w):
        arr.setflags(write=False)  # any write would raise
    m = _fit(cls, s, y, w)
    grid = GRID.copy()
    grid.setflags(write=False)
    m.predict(grid)
    for arr, ref in zip((s, y, w), copies, strict=True):
        np.testing.assert_array_equal(arr, ref)
    np.testing.assert_array_equal(grid, GRID)


@pytest.mark.filterwarnings("ignore::UserWarning")
@SETTINGS
@given(data=multiclass_data())
def test_temperature_multiclass_inputs_are_not_modified(data):
    # read-only inputs, and single rows (whose transpose is already contiguous, so an in-place
    # softmax over it would write through to the caller's array)
    z, y, w = data
    copies = [z.copy(), y.copy(), w.copy()]
    for arr in (z, y, w):
        arr.setflags(write=False)  # any write would raise
    m = TemperatureMap().fit(z, y, sample_weight=w)
    for rows in (z, z[:1], z[-1:]):
        q = m.predict(rows)
        np.testing.assert_allclose(q.sum(axis=1), 1.0)
    for arr, ref in zip((z, y, w), copies, strict=True):
        np.testing.assert_array_equal(arr, ref)


@pytest.mark.filterwarnings("ignore::UserWarning")
@pytest.mark.parametrize("cls", ALL_MAPS)
@settings(max_examples=10, deadline=None)
@given(data=binary_data())
def test_pickle_round_trip_gives_identical_predictions(cls, data):
    s, y, w = data
    m = _fit(cls, s, y, w)
    again = pickle.loads(pickle.dumps(m))
    np.testing.assert_array_equal(m.predict(GRID), again.predict(GRID))
    assert again.get_params() == m.get_params()
