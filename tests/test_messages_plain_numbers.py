"""Error messages show numbers as plain Python numbers, never NumPy reprs.

Parameters often arrive as NumPy scalars (a grid from ``np.linspace`` in a parameter search, a
value read from an array); NumPy 2 prints them as ``np.float64(1.5)``. Every message must say
``1.5``. Invariant of the messages, checked on one bad value per kind of check.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.datasets import make_parcels
from probwrap.metrics import bootstrap_interval, brier_score, calibration_slope_intercept
from probwrap.scale import tally_scores
from probwrap.shift import PriorEstimator, check_prior, shift_cutoff

Y = np.array([0, 1, 0, 1, 1, 0, 0, 1])
P = np.array([0.1, 0.8, 0.3, 0.6, 0.9, 0.2, 0.4, 0.7])
X = np.arange(16.0).reshape(8, 2)

CASES = {
    "check_prior": (lambda: check_prior(np.float64(0.3), 3), "(0.3)"),
    "shift_cutoff": (lambda: shift_cutoff(np.float64(1.5), 0.1, 0.2), "got 1.5"),
    "bootstrap level": (lambda: bootstrap_interval(brier_score, Y, P,
                                                   confidence_level=np.float64(1.5)), "got 1.5"),
    "bootstrap resamples": (lambda: bootstrap_interval(brier_score, Y, P,
                                                       n_resamples=np.float64(1.5)), "got 1.5"),
    "slope clip": (lambda: calibration_slope_intercept(Y, P, clip=np.float64(0.7)), "got 0.7"),
    "prior estimator": (lambda: PriorEstimator(confidence_level=np.float64(1.5)).fit(
        np.column_stack([1 - P, P]), Y), "got 1.5"),
    "tally resolution": (lambda: tally_scores(P, Y, resolution=np.float64(-1.0)), "got -1.0"),
    "calibration clip": (lambda: CalibrationWrapper(LogisticRegression(), cv=2,
                                                    clip=np.float64(0.7)).fit(X, Y), "got 0.7"),
    "policy cutoff": (lambda: CostPolicyWrapper(LogisticRegression(), cv=2, strategy="bayes",
                                                cutoff=np.float64(0.3)).fit(X, Y),
                      "cutoff=0.3"),
    "parcels prevalence": (lambda: make_parcels(50, prevalence=np.float64(1.5)), "got 1.5"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_messages_print_numpy_scalars_as_plain_numbers(case):
    call, expected = CASES[case]
    with pytest.raises(ValueError) as err:
        call()
    message = str(err.value)
    assert "np." not in message, message
    assert expected in message, message
