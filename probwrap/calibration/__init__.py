"""Calibration maps (array core): fitted on held-out scores, they return probabilities."""

from ._base import (
    NONPARAMETRIC,
    CalibrationMap,
    ExactZeroFloorWarning,
    FewClassRowsWarning,
    UnverifiedSharpeningWarning,
    WeightScaleWarning,
)
from ._beta import BetaMap
from ._binning import BinningMap
from ._identity import IdentityMap
from ._isotonic import IsotonicMap
from ._logodds import DEFAULT_CLIP, log_odds_to_proba, proba_to_log_odds, proba_to_log_proba
from ._multicalibration import MulticalibrationMap
from ._platt import PlattMap
from ._serialize import MAP_SCORE_SCALES, map_from_dict, map_score_scale, map_to_dict
from ._temperature import TemperatureMap
from ._vector_scaling import MatrixScalingMap, VectorScalingMap
from ._venn_abers import VennAbersMap

__all__ = [
    "BetaMap",
    "BinningMap",
    "CalibrationMap",
    "DEFAULT_CLIP",
    "ExactZeroFloorWarning",
    "FewClassRowsWarning",
    "IdentityMap",
    "IsotonicMap",
    "MAP_SCORE_SCALES",
    "MatrixScalingMap",
    "MulticalibrationMap",
    "NONPARAMETRIC",
    "PlattMap",
    "TemperatureMap",
    "UnverifiedSharpeningWarning",
    "VectorScalingMap",
    "VennAbersMap",
    "WeightScaleWarning",
    "log_odds_to_proba",
    "map_from_dict",
    "map_score_scale",
    "map_to_dict",
    "proba_to_log_odds",
    "proba_to_log_proba",
]
