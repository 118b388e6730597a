"""Metrics for probabilistic forecasts (array core).

Proper scores (:func:`log_loss`, :func:`brier_score`), calibration measures
(:func:`expected_calibration_error`, :func:`classwise_calibration_error`,
:func:`reliability_table`, :func:`brier_decomposition`, :func:`calibration_slope_intercept`),
decision-curve quantities (:func:`net_benefit`, :func:`net_benefit_treat_all`) and a
bootstrap interval for any of them (:func:`bootstrap_interval`). Every metric takes an optional
``sample_weight`` in which weight 2 counts a row twice.
"""

from ._bootstrap import BootstrapResult, ConfidenceInterval, bootstrap_interval
from ._calibration import (
    BrierDecomposition,
    ReliabilityTable,
    brier_decomposition,
    classwise_calibration_error,
    expected_calibration_error,
    reliability_table,
)
from ._scores import brier_score, log_loss, net_benefit, net_benefit_treat_all
from ._slope import CalibrationSlopeIntercept, calibration_slope_intercept

__all__ = [
    "BootstrapResult",
    "BrierDecomposition",
    "CalibrationSlopeIntercept",
    "ConfidenceInterval",
    "ReliabilityTable",
    "bootstrap_interval",
    "brier_decomposition",
    "brier_score",
    "calibration_slope_intercept",
    "classwise_calibration_error",
    "expected_calibration_error",
    "log_loss",
    "net_benefit",
    "net_benefit_treat_all",
    "reliability_table",
]
