"""Property tests (hypothesis) of the vector and matrix scaling maps: multiclass and binary."""

from __future__ import annotations

import json
import pickle

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from probwrap.calibration import MatrixScalingMap, VectorScalingMap, map_from_dict, map_to_dict

SETTINGS = settings(max_examples=25, deadline=None)
MAPS = [VectorScalingMap, MatrixScalingMap]


@st.composite
def multiclass_data(draw, max_rows=30):
    k = draw(st.integers(2, 5))
    n = draw(st.integers(k, max_rows))
    z = np.array(
        draw(st.lists(st.floats(-8, 8, allow_nan=False), min_size=n * k, max_size=n * k))
    ).reshape(n, k)
    y = np.array(draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n)))
    y[:k] = np.arange(k)  # every class present
    w = np.array(draw(st.lists(st.integers(1, 3), min_size=n, max_size=n)), dtype=float)
    return z, y, w


@st.composite
def binary_data(draw):
    n = draw(st.integers(2, 40))
    s = np.array(draw(st.lists(st.integers(-80, 80), min_size=n, max_size=n)), dtype=float) / 4
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)), dtype=float)
    y[:2] = [0.0, 1.0]
    return s, y


@pytest.mark.parametrize("cls", MAPS)
@SETTINGS
@given(data=multiclass_data())
def test_outputs_lie_strictly_inside_zero_one_and_rows_sum_to_one(cls, data):
    # any labels, including classes separated perfectly by the scores and tiny sets
    z, y, w = data
    out = cls().fit(z, y, sample_weight=w).predict(z)
    assert np.all(np.isfinite(out))
    assert np.all((out > 0.0) & (out < 1.0))
    np.testing.assert_allclose(out.sum(axis=1), 1.0, atol=1e-12)


@pytest.mark.parametrize("cls", MAPS)
@SETTINGS
@given(data=binary_data())
def test_binary_log_odds_give_probabilities_inside_zero_one(cls, data):
    s, y = data
    m = cls().fit(s, y)
    out = m.predict(s)
    assert out.shape == s.shape
    assert np.all((out > 0.0) & (out < 1.0))
    # a linear map of the log-odds: monotone in one direction
    d = np.diff(m.predict(np.linspace(-40, 40, 81)))
    assert np.all(d >= -1e-12) or np.all(d <= 1e-12)


@pytest.mark.parametrize("cls", MAPS)
@SETTINGS
@given(data=multiclass_data(), pick=st.integers(0, 10**6))
def test_weight_two_equals_a_duplicated_row(cls, data, pick):
    z, y, _ = data
    i = pick % z.shape[0]
    w2 = np.ones(z.shape[0])
    w2[i] = 2.0
    a = cls().fit(z, y, sample_weight=w2)
    b = cls().fit(np.vstack([z, z[i]]), np.append(y, y[i]))
    np.testing.assert_allclose(a.predict(z), b.predict(z), atol=1e-6)


@pytest.mark.parametrize("cls", MAPS)
@SETTINGS
@given(data=multiclass_data(), seed=st.integers(0, 2**32 - 1))
def test_row_order_does_not_matter(cls, data, seed):
    z, y, w = data
    perm = np.random.default_rng(seed).permutation(z.shape[0])
    a = cls().fit(z, y, sample_weight=w).predict(z)
    b = cls().fit(z[perm], y[perm], sample_weight=w[perm]).predict(z)
    np.testing.assert_allclose(a, b, atol=1e-6)


@pytest.mark.parametrize("cls", MAPS)
@settings(max_examples=10, deadline=None)
@given(data=multiclass_data())
def test_inputs_are_not_modified_and_pickle_and_json_round_trips(cls, data):
    z, y, w = data
    copies = [z.copy(), y.copy(), w.copy()]
    for arr in (z, y, w):
        arr.setflags(write=False)  # any write would raise
    m = cls().fit(z, y, sample_weight=w)
    for arr, ref in zip((z, y, w), copies, strict=True):
        np.testing.assert_array_equal(arr, ref)
    probe = np.vstack([z, -z, 5.0 * z])
    again = pickle.loads(pickle.dumps(m))
    np.testing.assert_array_equal(m.predict(probe), again.predict(probe))
    d = json.loads(json.dumps(map_to_dict(m, score_scale="log-odds"), allow_nan=False))
    rebuilt = map_from_dict(d)
    assert type(rebuilt) is cls and rebuilt.get_params() == m.get_params()
    np.testing.assert_array_equal(m.predict(probe), rebuilt.predict(probe))


@pytest.mark.parametrize("cls", MAPS)
def test_scaling_the_scores_keeps_the_fit(cls):
    # the shrinkage of the per-class terms is measured in units of the score scale, so
    # multiplying every score by a constant changes the probabilities only through the very
    # weak pull toward the identity map (which does depend on the units): by less than 0.002
    # here (the fitted map differs from the raw softmax of z by up to 0.15)
    rng = np.random.default_rng(0)
    z = rng.normal(size=(60, 4)) * 2
    y = np.argmax(z + rng.gumbel(size=z.shape), axis=1)
    a = cls().fit(z, y).predict(z)
    b = cls().fit(z * 50.0, y).predict(z * 50.0)
    np.testing.assert_allclose(a, b, atol=2e-3)
