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
    CalibrationSlopeIntercept,
    ReliabilityTable,
    brier_decomposition,
    calibration_slope_intercept,
    classwise_calibration_error,
    expected_calibration_error,
    reliability_table,
)
from ._calibration_tests import (
    HosmerLemeshowResult,
    SpiegelhalterResult,
    debiased_calibration_error,
    hosmer_lemeshow_test,
    smooth_calibration_error,
    spiegelhalter_z_test,
)
from ._scores import brier_score, log_loss, net_benefit, net_benefit_treat_all

__all__ = [
    "BootstrapResult",
    "BrierDecomposition",
    "CalibrationSlopeIntercept",
    "ConfidenceInterval",
    "HosmerLemeshowResult",
    "ReliabilityTable",
    "SpiegelhalterResult",
    "bootstrap_interval",
    "brier_decomposition",
    "brier_score",
    "calibration_slope_intercept",
    "classwise_calibration_error",
    "debiased_calibration_error",
    "expected_calibration_error",
    "hosmer_lemeshow_test",
    "log_loss",
    "net_benefit",
    "net_benefit_treat_all",
    "reliability_table",
    "smooth_calibration_error",
    "spiegelhalter_z_test",
]
