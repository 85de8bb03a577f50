"""The glassware model's public names, from its two modules.

:mod:`planner.lab.tolerances` holds the tolerance tables (ISO and ASTM), maximum permissible
errors and standard uncertainties; :mod:`planner.lab.deliveries` the volumes a shelf can
deliver and the ways to make them. This module gathers both for callers that need the
catalogue as a whole, and adds the volumetric flasks the prep room makes stocks in.
"""

from __future__ import annotations

import math

from planner.lab.deliveries import (
    MAX_COMBINATIONS,
    MAX_DELIVERIES,
    Aliquots,
    DeliverableVolume,
    Delivery,
    VolumeTable,
    combination_count,
    combination_uncertainty_mL,
    deliverable_volumes,
    delivers,
    devices_by_id,
    is_deliverable,
    reading_count,
    single_volumes_mL,
    volume_table,
)
from planner.lab.tolerances import (
    TOLERANCE_SOURCES,
    ASTM_TOLERANCES_mL,
    ISO_4788_DIVISIONS_mL,
    ISO_8655_2_ERRORS_uL,
    ISO_TOLERANCES_mL,
    piston_errors_uL,
    standard_uncertainty_mL,
    table_tolerance_mL,
    tolerance_mL,
)

__all__ = [
    "MAX_COMBINATIONS",
    "MAX_DELIVERIES",
    "TOLERANCE_SOURCES",
    "ASTM_TOLERANCES_mL",
    "Aliquots",
    "DeliverableVolume",
    "Delivery",
    "FLASK_SIZES_mL",
    "ISO_4788_DIVISIONS_mL",
    "ISO_8655_2_ERRORS_uL",
    "ISO_TOLERANCES_mL",
    "VolumeTable",
    "combination_count",
    "combination_uncertainty_mL",
    "deliverable_volumes",
    "delivers",
    "devices_by_id",
    "is_deliverable",
    "piston_errors_uL",
    "reading_count",
    "single_volumes_mL",
    "standard_uncertainty_mL",
    "stock_flasks",
    "table_tolerance_mL",
    "tolerance_mL",
    "volume_table",
]

#: Volumetric flask sizes a prep room usually has for making stocks [mL]
#: (ISO 1042 nominal capacities, from memory).
FLASK_SIZES_mL = (100.0, 250.0, 500.0, 1000.0, 2000.0)


def stock_flasks(volume_mL: float) -> tuple[float, int]:
    """The flasks to make a stock in: the smallest of :data:`FLASK_SIZES_mL` that holds
    ``volume_mL`` (not wastefully large), else as many of the largest as cover it.

    >>> stock_flasks(180.0), stock_flasks(4500.0)
    ((250.0, 1), (2000.0, 3))
    """
    for size in FLASK_SIZES_mL:
        if size >= volume_mL:
            return size, 1
    size = FLASK_SIZES_mL[-1]
    return size, math.ceil(volume_mL / size)
