"""Probability <-> log-odds helpers, checked against scipy.special."""

import numpy as np
import pytest
from scipy.special import expit, logit, softmax

from probwrap.calibration import log_odds_to_proba, proba_to_log_odds, proba_to_log_proba


def test_log_odds_matches_scipy_logit_inside_the_clip():
    p = np.linspace(0.001, 0.999, 999)
    np.testing.assert_allclose(proba_to_log_odds(p), logit(p), rtol=1e-12)
    np.testing.assert_allclose(log_odds_to_proba(logit(p)), p, rtol=1e-12)
    np.testing.assert_allclose(proba_to_log_odds(np.column_stack([1 - p, p])), logit(p), rtol=1e-12)


def test_exact_zero_and_one_become_finite_and_keep_order():
    out = proba_to_log_odds([0.0, 1e-300, 0.3, 1.0 - 1e-16, 1.0])
    assert np.all(np.isfinite(out))
    np.testing.assert_allclose(out[[0, -1]], [logit(1e-12), logit(1 - 1e-12)], rtol=1e-9)
    assert np.all(np.diff(out) >= 0)
    np.testing.assert_allclose(proba_to_log_odds([0.0], clip=1e-6), logit(1e-6))


def test_log_proba_and_softmax():
    p = np.array([[0.2, 0.3, 0.5], [1.0, 0.0, 0.0]])
    lp = proba_to_log_proba(p)
    np.testing.assert_allclose(lp[0], np.log(p[0]))
    assert np.all(np.isfinite(lp))
    np.testing.assert_allclose(log_odds_to_proba(lp[:1]), softmax(lp[:1], axis=1))
    np.testing.assert_allclose(log_odds_to_proba(np.array([0.0, 2.0])), expit([0.0, 2.0]))


def test_inputs_are_not_modified():
    p = np.array([0.0, 0.5, 1.0])
    proba_to_log_odds(p)
    np.testing.assert_array_equal(p, [0.0, 0.5, 1.0])


@pytest.mark.parametrize(
    "bad, match",
    [
        ([0.5, 1.2], "`proba` must contain probabilities in \\[0, 1\\]"),
        ([0.5, -0.1], "`proba` must contain probabilities in \\[0, 1\\]"),
        ([0.5, np.nan], "`proba` contains NaN"),
        ([[0.2, 0.3, 0.5]], "proba_to_log_proba"),
    ],
)
def test_bad_probabilities(bad, match):
    with pytest.raises(ValueError, match=match):
        proba_to_log_odds(bad)


def test_bad_clip_and_rows_not_summing_to_one():
    with pytest.raises(ValueError, match="`clip` must be in"):
        proba_to_log_odds([0.5], clip=0.0)
    with pytest.raises(ValueError, match="Each row of `proba` must sum to one"):
        proba_to_log_proba([[0.2, 0.2, 0.2]])
    with pytest.raises(ValueError, match="`scores` contains"):
        log_odds_to_proba([0.0, np.inf])
