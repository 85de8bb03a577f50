"""Sorted distinct values of 1-D arrays, without numpy's masked-array module.

``numpy.unique`` on a 1-D array asks ``numpy.ma`` whether the array is masked, which imports
that module on first use: 15 to 20 ms of CPU, more than the design's own use of it, in every
``planner plan``. The design only ever needs the distinct values of plain integer arrays.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["distinct", "distinct_inverse"]


def distinct_inverse(values: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The sorted distinct values of a 1-D array and each element's index among them (what
    ``numpy.unique(values, return_inverse=True)`` gives)."""
    flat = np.asarray(values).reshape(-1)
    order = np.argsort(flat, kind="stable")
    ordered = flat[order]
    first = np.ones(ordered.size, dtype=bool)
    first[1:] = ordered[1:] != ordered[:-1]
    inverse = np.empty(flat.size, dtype=np.int64)
    inverse[order] = np.cumsum(first) - 1
    result: NDArray[np.int64] = ordered[first]
    return result, inverse


def distinct(values: NDArray[np.int64]) -> NDArray[np.int64]:
    """The sorted distinct values of a 1-D array (``numpy.unique(values)``)."""
    return distinct_inverse(values)[0]
