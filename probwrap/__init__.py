"""probwrap: calibrated probabilities, least-expected-cost decisions and base-rate shift.

The wrappers are scikit-learn meta-estimators that nest, for example
``CostPolicyWrapper(PriorShiftWrapper(CalibrationWrapper(model)))``. The subpackages
``probwrap.calibration``, ``probwrap.decision``, ``probwrap.shift`` and ``probwrap.metrics`` work
on plain arrays; ``probwrap.datasets`` makes the invented demo data.
"""

from ._calibration_wrapper import CalibrationWrapper
from ._cost_policy import CostPolicyWrapper
from ._prior_shift import PriorShiftWrapper
from ._version import __version__

__all__ = ["CalibrationWrapper", "CostPolicyWrapper", "PriorShiftWrapper", "__version__"]
