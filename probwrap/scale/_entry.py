"""The one entry through which the wrappers (layer 2) reach the scale layer.

The wrappers import from here and from nowhere else in :mod:`probwrap.scale`; the scale modules
import the array core (layer 1) and the shared lower modules (``_predictions``, ``_validation``)
but never a wrapper, so the two layers never import each other (checked by
``tests/test_import_layers.py``). Dask itself is imported only when Dask input is given.
"""

from __future__ import annotations

from ._bootstrap import tally_cutoff_interval, tally_prior_interval
from ._dask import (
    dask_predict,
    heldout_from_dask,
    monitor_dask,
    owner_resolution,
    unlabelled_proba_from_dask,
)
from ._multiclass import estimate_multiclass_target, fit_multiclass_source
from ._multiclass_wrappers import (
    first_block_row_costs,
    fit_multiclass_calibration,
    heldout_cost_dask,
)
from ._tally import replicate_seed

__all__ = [
    "dask_predict",
    "estimate_multiclass_target",
    "first_block_row_costs",
    "fit_multiclass_calibration",
    "fit_multiclass_source",
    "heldout_cost_dask",
    "heldout_from_dask",
    "monitor_dask",
    "owner_resolution",
    "replicate_seed",
    "tally_cutoff_interval",
    "tally_prior_interval",
    "unlabelled_proba_from_dask",
]
