"""The volumetric flasks the prep room makes stocks in.

The rest of the glassware model lives in two modules, imported from where it is defined:
:mod:`planner.lab.tolerances` holds the tolerance tables (ISO and ASTM), maximum permissible
errors and standard uncertainties; :mod:`planner.lab.deliveries` the volumes a shelf can
deliver and the ways to make them.
"""

from __future__ import annotations

import math

__all__ = ["FLASK_SIZES_mL", "stock_flasks"]

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
