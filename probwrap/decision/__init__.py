"""Least-expected-cost decisions (array core).

Pure computation on probabilities, scores, labels and weights; nothing here knows about
estimators. Cost matrices have one row per true class and one column per action; the entry is
the cost of taking that action when that class is true, and negative entries are gains.
"""

from .._validation import ImpliedPositiveClassWarning
from ._bayes import bayes_actions, expected_costs
from ._capacity import ActionBudget, action_savings, budget_actions, fit_action_budget
from ._costs import (
    BINARY_COST_KEYS,
    add_reject_action,
    binary_cost_matrix,
    check_cost_matrix,
    check_row_costs,
    plugin_cutoff,
    zero_one_costs,
)
from ._cutoff import (
    CutoffSearchResult,
    capacity_cutoff,
    check_capacity,
    search_cutoff,
)
from ._cutoff_interval import CutoffInterval, CutoffIntervalCoverageWarning, cutoff_interval
from ._guarantee import (
    GUARANTEE_REQUIREMENTS,
    GuaranteedCutoff,
    GuaranteeUnreachableError,
    binomial_tail_pvalue,
    guaranteed_cutoff,
)
from ._guarantee_classes import GuaranteedOffsets, guaranteed_class_offsets
from ._offsets import (
    ClassOffsetResult,
    OffsetCurve,
    apply_class_offsets,
    class_offset_curve,
    tune_class_offsets,
)
from ._plugin_check import PlugInCostAboveOneActionWarning
from ._scorer import make_cost_scorer, realised_cost
from ._settle import SettledCutoff, SettledOffsets, settle_class_offsets, settle_cutoff

__all__ = [
    "BINARY_COST_KEYS",
    "GUARANTEE_REQUIREMENTS",
    "ActionBudget",
    "ClassOffsetResult",
    "CutoffInterval",
    "CutoffIntervalCoverageWarning",
    "ImpliedPositiveClassWarning",
    "CutoffSearchResult",
    "GuaranteeUnreachableError",
    "GuaranteedCutoff",
    "GuaranteedOffsets",
    "OffsetCurve",
    "PlugInCostAboveOneActionWarning",
    "SettledCutoff",
    "SettledOffsets",
    "action_savings",
    "add_reject_action",
    "apply_class_offsets",
    "bayes_actions",
    "binary_cost_matrix",
    "binomial_tail_pvalue",
    "budget_actions",
    "capacity_cutoff",
    "check_capacity",
    "check_cost_matrix",
    "check_row_costs",
    "class_offset_curve",
    "cutoff_interval",
    "expected_costs",
    "fit_action_budget",
    "guaranteed_class_offsets",
    "guaranteed_cutoff",
    "make_cost_scorer",
    "plugin_cutoff",
    "realised_cost",
    "search_cutoff",
    "settle_class_offsets",
    "settle_cutoff",
    "tune_class_offsets",
    "zero_one_costs",
]
