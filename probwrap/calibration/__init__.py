"""Calibration maps (array core): fitted on held-out scores, they return probabilities."""

from ._base import CalibrationMap
from ._logodds import DEFAULT_CLIP, log_odds_to_proba, proba_to_log_odds, proba_to_log_proba

__all__ = [
    "CalibrationMap",
    "DEFAULT_CLIP",
    "log_odds_to_proba",
    "proba_to_log_odds",
    "proba_to_log_proba",
]
