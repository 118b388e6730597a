"""One-vs-rest log-odds of multiclass log-probabilities against SciPy's ``logsumexp``."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import logsumexp

from probwrap._calibration_wrapper import _log_odds_against_rest


def _scipy_reference(scores):
    # SciPy's logsumexp over the other columns, class by class
    out = np.empty_like(scores)
    for k in range(scores.shape[1]):
        out[:, k] = scores[:, k] - logsumexp(np.delete(scores, k, axis=1), axis=1)
    return out


@pytest.mark.parametrize("k", [3, 5, 10])
def test_log_odds_against_rest_match_scipy(k):
    rng = np.random.default_rng(k)
    z = rng.normal(size=(500, k)) * 5
    lp = z - logsumexp(z, axis=1, keepdims=True)
    # a top class of probability 1 - 1e-14 (its rest must not cancel to 0), ties at the top,
    # uniform rows, and rows whose other classes sit at the smallest normal double
    lp[:5] = np.log([1 - 1e-14] + [1e-14 / (k - 1)] * (k - 1))
    lp[5:10, :2] = np.log(0.5)
    lp[5:10, 2:] = -700.0
    lp[10:15] = np.log(1.0 / k)
    lp[15, :] = np.log(np.finfo(float).tiny)
    lp[15, 0] = 0.0
    copy = lp.copy()
    out = _log_odds_against_rest(lp)
    np.testing.assert_array_equal(lp, copy)  # input untouched
    # both sides are exact to a few units in the last place of values up to ~700
    np.testing.assert_allclose(out, _scipy_reference(lp), rtol=1e-14, atol=1e-12)
    assert np.all(np.isfinite(out))
    # the top class of the near-certain rows: log(1 - 1e-14) - log(1e-14)
    assert out[0, 0] == pytest.approx(np.log1p(-1e-14) - np.log(1e-14), rel=1e-12)
