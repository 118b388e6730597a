"""probwrap: calibrated probabilities, least-expected-cost decisions and base-rate shift.

The wrappers are scikit-learn meta-estimators; the subpackages ``probwrap.calibration``,
``probwrap.metrics`` and ``probwrap.datasets`` work on plain arrays.
"""

from ._calibration_wrapper import CalibrationWrapper

__version__ = "0.1.0"

__all__ = ["CalibrationWrapper", "__version__"]
