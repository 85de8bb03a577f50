"""JSON documents: full float precision, sorted keys, never NaN or infinity."""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Mapping
from typing import Any

import numpy as np

__all__ = ["dumps", "to_jsonable"]


def to_jsonable(value: Any) -> Any:
    """Convert dataclasses, numpy scalars and arrays, tuples and mappings to JSON data.

    Raises
    ------
    ValueError
        If a float is NaN or infinite: such a number must never reach a sheet or a consumer.
    """
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: to_jsonable(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, Mapping):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [to_jsonable(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        if not math.isfinite(number):
            raise ValueError(f"non-finite number {number!r} in a JSON document")
        return number
    return value


def dumps(document: Any) -> str:
    """One JSON document with sorted keys and full precision, ending in a newline."""
    return json.dumps(to_jsonable(document), sort_keys=True, indent=2, allow_nan=False) + "\n"
