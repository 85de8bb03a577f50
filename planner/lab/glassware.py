"""The glassware model's public names, from its two modules.

:mod:`planner.lab.tolerances` holds the tolerance tables (ISO and ASTM), maximum permissible
errors and standard uncertainties; :mod:`planner.lab.deliveries` the volumes a shelf can
deliver and the ways to make them. This module gathers both for callers that need the
catalogue as a whole.
"""

from __future__ import annotations

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
    "table_tolerance_mL",
    "tolerance_mL",
    "volume_table",
]
