"""Display objects for calibration, cost, decision curves, actions and prevalence (optional ``plot`` extra).

Each display follows scikit-learn's plotting convention: build it with ``from_estimator`` or
``from_predictions`` (which compute the numbers with :mod:`probwrap.metrics`,
:mod:`probwrap.decision` or :mod:`probwrap.shift` and draw them), read the numbers from its
attributes, and find the drawing in ``ax_`` and ``figure_``. matplotlib is imported only when
something is drawn; figures are created without pyplot, so no window opens.
"""

from ._actions import ActionShareDisplay
from ._corp import IsotonicReliabilityDiagram
from ._cost import CostCurveDisplay
from ._cost_space import CostRangeDisplay, GainChartDisplay
from ._decision_curve import DecisionCurveDisplay
from ._groups import GroupReliabilityDisplay
from ._intervals import consistency_band, wilson_interval
from ._prevalence import ClassPriorDisplay, PrevalenceDriftDisplay
from ._reliability import ReliabilityDiagram
from ._style import PALETTE

__all__ = [
    "PALETTE",
    "ActionShareDisplay",
    "ClassPriorDisplay",
    "CostCurveDisplay",
    "CostRangeDisplay",
    "DecisionCurveDisplay",
    "GainChartDisplay",
    "GroupReliabilityDisplay",
    "IsotonicReliabilityDiagram",
    "PrevalenceDriftDisplay",
    "ReliabilityDiagram",
    "consistency_band",
    "wilson_interval",
]
