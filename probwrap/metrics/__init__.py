"""Metrics for probabilistic forecasts (array core).

Proper scores (:func:`log_loss`, :func:`brier_score`), calibration measures
(:func:`expected_calibration_error`, :func:`classwise_calibration_error`,
:func:`reliability_table`, :func:`brier_decomposition`, :func:`calibration_slope_intercept`),
decision-curve quantities (:func:`net_benefit`, :func:`net_benefit_treat_all`) and a
bootstrap interval for any of them (:func:`bootstrap_interval`). Calibration tests and errors
with known behaviour (:func:`hosmer_lemeshow_test`, :func:`spiegelhalter_z_test`,
:func:`smooth_calibration_error`, :func:`debiased_calibration_error`), the bin-free CORP
reliability curve and score decomposition (:func:`corp_reliability`, :func:`score_decomposition`),
performance over uncertain costs (:func:`cost_curve`, :func:`brier_curve`, :func:`lift_gain`),
and all of the main checks group by group (:func:`calibration_by_group`).
Every metric takes an optional ``sample_weight`` in which weight 2 counts a row twice.
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
from ._calibration_tests import (
    ApproximatePValueWarning,
    HosmerLemeshowResult,
    SpiegelhalterResult,
    debiased_calibration_error,
    hosmer_lemeshow_test,
    smooth_calibration_error,
    spiegelhalter_z_test,
)
from ._cost_curves import (
    BrierCurve,
    CostCurve,
    LiftGain,
    brier_curve,
    cost_curve,
    lift_gain,
)
from ._groups import GroupCheck, GroupChecks, GroupGap, calibration_by_group
from ._inputs import UnsortedLabelsWarning
from ._reliability_corp import (
    CorpReliability,
    ScoreDecomposition,
    corp_reliability,
    score_decomposition,
)
from ._scores import brier_score, log_loss, net_benefit, net_benefit_treat_all
from ._slope import CalibrationSlopeIntercept, calibration_slope_intercept

__all__ = [
    "BootstrapResult",
    "BrierCurve",
    "BrierDecomposition",
    "CalibrationSlopeIntercept",
    "ConfidenceInterval",
    "CorpReliability",
    "CostCurve",
    "GroupCheck",
    "GroupChecks",
    "GroupGap",
    "ApproximatePValueWarning",
    "UnsortedLabelsWarning",
    "HosmerLemeshowResult",
    "LiftGain",
    "ReliabilityTable",
    "ScoreDecomposition",
    "SpiegelhalterResult",
    "bootstrap_interval",
    "brier_curve",
    "brier_decomposition",
    "brier_score",
    "calibration_by_group",
    "calibration_slope_intercept",
    "classwise_calibration_error",
    "corp_reliability",
    "cost_curve",
    "debiased_calibration_error",
    "expected_calibration_error",
    "hosmer_lemeshow_test",
    "lift_gain",
    "log_loss",
    "net_benefit",
    "net_benefit_treat_all",
    "reliability_table",
    "score_decomposition",
    "smooth_calibration_error",
    "spiegelhalter_z_test",
]
