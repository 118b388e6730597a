"""Prior (label) shift: re-weight posteriors to new class priors and estimate those priors.

Array core: functions and small objects on posteriors, labels and weights; nothing here knows
about scikit-learn estimators. :class:`probwrap.PriorShiftWrapper` is the estimator face.
"""

from ._adjust import adjust_to_prior, check_prior, project_to_simplex, shift_cutoff
from ._alarms import (
    BaselineErrorRunLength,
    CusumResult,
    baseline_error_run_length,
    batch_effective_rows,
    cusum_alarms,
    cusum_run_length,
    decision_interval_for_run_length,
    labelled_share_of_variance,
    signed_shift_scores,
)
from ._batch_cost import expected_cost_by_batch
from ._by_batch import class_shift_scores, prior_by_batch
from ._calibration import BiasCorrectedScaling
from ._change_points import ChangePointResult, change_point_posterior
from ._confusion import acc_prior, bbse_prior, binomial_interval, heldout_confusion
from ._estimate import (
    BoundaryPriorWarning,
    FewLabelledRowsWarning,
    ImprecisePriorWarning,
    NoConsistentPriorWarning,
    PriorEstimate,
    PriorIntervalConflictWarning,
    PriorNotIdentifiedWarning,
    em_prior,
    prior_log_likelihood,
)
from ._estimator import CALIBRATIONS, INTERVALS, PRIOR_METHODS, PriorEstimator
from ._feature_mix import (
    FeatureCheckPowerWarning,
    FeatureMixtureMisfit,
    FeatureMixtureMisfitWarning,
    feature_mixture_misfit,
)
from ._interval import bca_interval, jackknife_acceleration, score_interval
from ._mixture_fit import ClassMixtureMisfitWarning, class_mixture_misfit
from ._repeats import RepeatedRowsWarning
from ._shift_tests import NoShiftHarmWarning, ShiftTestResult, shift_score_test, shift_test

__all__ = [
    "BiasCorrectedScaling",
    "BoundaryPriorWarning",
    "ClassMixtureMisfitWarning",
    "class_mixture_misfit",
    "FeatureCheckPowerWarning",
    "FeatureMixtureMisfit",
    "FeatureMixtureMisfitWarning",
    "feature_mixture_misfit",
    "PriorIntervalConflictWarning",
    "NoConsistentPriorWarning",
    "FewLabelledRowsWarning",
    "ImprecisePriorWarning",
    "NoShiftHarmWarning",
    "CALIBRATIONS",
    "ChangePointResult",
    "change_point_posterior",
    "CusumResult",
    "cusum_alarms",
    "cusum_run_length",
    "BaselineErrorRunLength",
    "baseline_error_run_length",
    "decision_interval_for_run_length",
    "labelled_share_of_variance",
    "batch_effective_rows",
    "signed_shift_scores",
    "INTERVALS",
    "PriorNotIdentifiedWarning",
    "RepeatedRowsWarning",
    "bca_interval",
    "jackknife_acceleration",
    "score_interval",
    "shift_score_test",
    "PRIOR_METHODS",
    "PriorEstimate",
    "PriorEstimator",
    "ShiftTestResult",
    "acc_prior",
    "adjust_to_prior",
    "bbse_prior",
    "binomial_interval",
    "check_prior",
    "em_prior",
    "expected_cost_by_batch",
    "heldout_confusion",
    "prior_by_batch",
    "class_shift_scores",
    "prior_log_likelihood",
    "project_to_simplex",
    "shift_cutoff",
    "shift_test",
]
