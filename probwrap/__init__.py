"""probwrap: calibrated probabilities, least-expected-cost decisions and base-rate shift.

The wrappers are scikit-learn meta-estimators that nest, for example
``CostPolicyWrapper(PriorShiftWrapper(CalibrationWrapper(model)))``. The subpackages
``probwrap.calibration``, ``probwrap.decision``, ``probwrap.shift`` and ``probwrap.metrics`` work
on plain arrays; ``probwrap.datasets`` makes the invented demo data.

The wrappers are imported on first use (``probwrap.CalibrationWrapper`` or ``from probwrap
import CalibrationWrapper``), so that ``import probwrap`` alone (the ``probwrap`` command line,
``probwrap --help``) does not load scikit-learn, SciPy and pandas.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from ._version import __version__

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors
    from ._calibration_wrapper import CalibrationWrapper
    from ._cost_policy import CostPolicyWrapper
    from ._prior_shift import PriorShiftWrapper

__all__ = ["CalibrationWrapper", "CostPolicyWrapper", "PriorShiftWrapper", "__version__"]

#: public names imported on first use, and the module defining each
_LAZY = {
    "CalibrationWrapper": "._calibration_wrapper",
    "CostPolicyWrapper": "._cost_policy",
    "PriorShiftWrapper": "._prior_shift",
}


def __getattr__(name: str) -> Any:
    """Import a wrapper class the first time it is asked for (PEP 562)."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(module, __name__), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
