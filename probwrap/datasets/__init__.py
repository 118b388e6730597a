"""Invented demo data: the parcel-sorting hub.

The data are made up for demonstrations and examples only; they are never used as a check
value in the tests.
"""

from ._parcels import (
    PARCEL_FEATURES,
    ROUTING_ACTIONS,
    make_parcels,
    parcel_routing_costs,
    parcel_source_prior,
)

__all__ = [
    "PARCEL_FEATURES",
    "ROUTING_ACTIONS",
    "make_parcels",
    "parcel_routing_costs",
    "parcel_source_prior",
]
