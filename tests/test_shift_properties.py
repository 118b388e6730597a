"""Property tests of the prior-shift array core (hypothesis)."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from probwrap.shift import adjust_to_prior, project_to_simplex, shift_cutoff

SETTINGS = settings(max_examples=40, deadline=None)


def simplex(k, low=0.01):
    return arrays(float, k, elements=st.floats(low, 1.0)).map(lambda v: v / v.sum())


@SETTINGS
@given(st.integers(2, 5).flatmap(lambda k: st.tuples(
    arrays(float, (6, k), elements=st.floats(0.001, 1.0)), simplex(k), simplex(k))))
def test_adjust_rows_sum_to_one_and_round_trip(args):
    raw, a, b = args
    p = raw / raw.sum(axis=1, keepdims=True)
    out = adjust_to_prior(p, a, b)
    assert np.all(np.isfinite(out)) and np.all(out >= 0)
    np.testing.assert_allclose(out.sum(axis=1), 1.0, atol=1e-12)
    np.testing.assert_allclose(adjust_to_prior(out, b, a), p, atol=1e-9)


@SETTINGS
@given(arrays(float, st.integers(1, 8), elements=st.floats(-5, 5)))
def test_projection_lands_on_simplex_and_is_idempotent(v):
    # Optimality (KKT) of the Euclidean projection: x - v is constant on the support of x and
    # no smaller off it (Held, Wolfe & Crowder 1974).
    x = project_to_simplex(v)
    assert np.all(x >= 0) and abs(x.sum() - 1) < 1e-12
    np.testing.assert_allclose(project_to_simplex(x), x, atol=1e-12)
    d = x - v
    support = x > 1e-12
    assert np.ptp(d[support]) < 1e-9
    assert np.all(d[~support] >= d[support].max() - 1e-9)


@SETTINGS
@given(st.floats(0, 1), st.floats(0.01, 0.99), st.floats(0.01, 0.99))
def test_shift_cutoff_is_monotone_in_target_prior(t, ps, pt):
    moved = shift_cutoff(t, ps, pt)
    assert 0 <= moved <= 1
    higher = shift_cutoff(t, ps, min(pt + 0.005, 0.995))
    assert higher <= moved + 1e-12  # more positives expected: act at a lower unadjusted level
