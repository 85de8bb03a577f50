"""Glassware catalogue: tolerances, standard uncertainties and the volumes a shelf can deliver.

A recipe may only ask for volumes that the glassware on the bench can actually deliver. This
module knows, for every device kind of :data:`planner.inputs.DEVICE_KINDS`:

- its maximum permissible error (tolerance) from the published standard for its kind and
  class, unless the plan gives the device its own ``tolerance_mL`` (a calibration certificate);
- the standard uncertainty of one delivery, tolerance / sqrt(6) (triangular distribution);
- every volume one use of the device can deliver, on an exact integer grid;
- every way to make a volume from several deliveries, fewest deliveries first.

Tolerance tables follow the ISO family of standards by default (ISO 648, ISO 1042, ISO 385,
ISO 835, ISO 4788, ISO 8655-2), because only that family covers every kind and size the planner
needs (ASTM E287 has no 5 mL buret, ASTM has no graduated-cylinder or piston-pipette table in
the set we cite). The ASTM tables (E969, E288, E287) are kept beside them in
:data:`ASTM_TOLERANCES_mL` for labs whose glassware is marked to ASTM; use
:func:`table_tolerance_mL` with ``standard="ASTM"`` or give the device a ``tolerance_mL``.

Volumes are handled internally as integers in picolitres (1 pL = 1e-9 mL), so that grids such
as 0.10, 0.11, ... 25.00 mL never drift (0.1 + 0.2 != 0.3 in floats) and two deliveries that
should give the same volume always do. Public functions take and return millilitres.

References
----------
.. [1] ISO 648:2008, Laboratory glassware -- Single-volume pipettes, Table 1.
.. [2] ISO 1042:1998, Laboratory glassware -- One-mark volumetric flasks, Table 1.
.. [3] ISO 385:2005, Laboratory glassware -- Burettes, Table 1.
.. [4] ISO 835:2007, Laboratory glassware -- Graduated pipettes, Tables 1 to 4.
.. [5] ISO 4788:2005, Laboratory glassware -- Graduated measuring cylinders, Table 1.
.. [6] ISO 8655-2:2002, Piston-operated volumetric apparatus -- Part 2: Piston pipettes,
   Table 1.
.. [7] ASTM E969-02 (Reapproved 2012), Standard Specification for Glass Volumetric (Transfer)
   Pipets, Table 1.
.. [8] ASTM E288-10, Standard Specification for Laboratory Glass Volumetric Flasks, Table 1
   and section 1.1.2.
.. [9] ASTM E287-02 (Reapproved 2019), Standard Specification for Laboratory Glass Graduated
   Burets, Table 1 and section 1.1.2.
.. [10] S. L. R. Ellison and A. Williams (eds), EURACHEM/CITAC Guide CG4, Quantifying
   Uncertainty in Analytical Measurement, 3rd ed., 2012, ISBN 978-0-948926-30-3, section 8.1
   and Appendix E.1 (triangular distribution, u = a / sqrt(6); section numbers from memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import TypeVar

import numpy as np
from numpy.typing import NDArray

from planner.errors import InvalidInputError
from planner.inputs import DEVICE_KINDS, Device

__all__ = [
    "MAX_COMBINATIONS",
    "TOLERANCE_SOURCES",
    "ASTM_TOLERANCES_mL",
    "DeliverableVolume",
    "ISO_4788_DIVISIONS_mL",
    "ISO_8655_2_ERRORS_uL",
    "ISO_TOLERANCES_mL",
    "combination_count",
    "combination_uncertainty_mL",
    "deliverable_volumes",
    "devices_by_id",
    "is_deliverable",
    "piston_errors_uL",
    "reading_count",
    "single_volumes_mL",
    "standard_uncertainty_mL",
    "table_tolerance_mL",
    "tolerance_mL",
]

# Integer grid unit: 1 pL = 1e-9 mL, the rounding the public functions promise.
_PL_PER_ML = 1_000_000_000
_PL_PER_UL = 1_000_000
_UL_PER_ML = 1000.0
# "Exactly deliverable" means within 1e-9 mL, i.e. 1 pL (DESIGN.md contract detail 5).
_MATCH_PL = 1.0
# Slack when matching a device size to a table row or to its own range [mL, and relative].
_SIZE_MATCH_mL = 1e-9

_VESSEL_KINDS = frozenset({"volumetric-flask", "tube"})
_CLASSED_KINDS = frozenset(
    {
        "transfer-pipette",
        "graduated-pipette",
        "buret",
        "volumetric-flask",
        "graduated-cylinder",
    }
)
_DEVICE_CLASSES = ("A", "B")

#: Most (option, volume) pairs :func:`deliverable_volumes` lists. Thirty catalogue devices
#: give at most about 1.2 million; 1.6e7 took 2.7 s and 660 MB, and 9e7 (twenty pipettes
#: with twenty finely read graded devices, found by fuzzing) 25 s and 5 GB.
MAX_COMBINATIONS = 5_000_000

_V = TypeVar("_V")


def _by_class(rows: Mapping[float, tuple[float, float]]) -> Mapping[str, Mapping[float, float]]:
    """Split {nominal: (class A, class B)} rows into read-only per-class tables."""
    return MappingProxyType(
        {
            "A": MappingProxyType({size: pair[0] for size, pair in rows.items()}),
            "B": MappingProxyType({size: pair[1] for size, pair in rows.items()}),
        }
    )


def _twice_class_a(rows: Mapping[float, float]) -> Mapping[float, tuple[float, float]]:
    """Class B rows as twice class A, where the standard says so in words."""
    return {size: (tol, 2.0 * tol) for size, tol in rows.items()}


# ---------------------------------------------------------------------------------------------
# ISO tables (the defaults). Each value is a maximum permissible error [mL], nominal [mL] ->
# (class A, class B). None of these rows could be checked against the standard's text while
# writing; they are all marked "from memory" until someone with the standards checks them.
# ---------------------------------------------------------------------------------------------

# ISO 648:2008, Single-volume pipettes, Table 1 (from memory). Class B is twice class A except
# at 1 mL, where the standard rounds to 0.015 mL (from memory).
_ISO_648_mL = {
    0.5: (0.005, 0.010),
    1.0: (0.008, 0.015),
    2.0: (0.010, 0.020),
    5.0: (0.015, 0.030),
    10.0: (0.020, 0.040),
    20.0: (0.030, 0.060),
    25.0: (0.030, 0.060),
    50.0: (0.050, 0.100),
    100.0: (0.080, 0.160),
}

# ISO 1042:1998, One-mark volumetric flasks, Table 1 (from memory). Class B is twice class A
# throughout (from memory).
_ISO_1042_mL = {
    5.0: (0.025, 0.050),
    10.0: (0.025, 0.050),
    20.0: (0.040, 0.080),
    25.0: (0.040, 0.080),
    50.0: (0.060, 0.120),
    100.0: (0.100, 0.200),
    200.0: (0.150, 0.300),
    250.0: (0.150, 0.300),
    500.0: (0.250, 0.500),
    1000.0: (0.400, 0.800),
    2000.0: (0.600, 1.200),
}

# ISO 385:2005, Burettes, Table 1 (from memory). Class B is not twice class A at 10 and 25 mL
# (from memory). The limit holds for the total capacity and for the difference between any two
# scale points (from memory), so it bounds every delivery (two readings) of the burette.
_ISO_385_mL = {
    5.0: (0.010, 0.020),
    10.0: (0.020, 0.050),
    25.0: (0.030, 0.050),
    50.0: (0.050, 0.100),
    100.0: (0.100, 0.200),
}

# ISO 835:2007, Graduated pipettes, Tables 1 to 4 (from memory; class A/AS and class B values
# agree across the pipette types for these sizes, from memory). Class B is not twice class A at
# 1 and 5 mL (from memory). Like ISO 385, the limit applies at any point of the scale (from
# memory).
_ISO_835_mL = {
    1.0: (0.006, 0.010),
    2.0: (0.010, 0.020),
    5.0: (0.030, 0.050),
    10.0: (0.050, 0.100),
    25.0: (0.100, 0.200),
}

# ISO 4788:2005, Graduated measuring cylinders, Table 1 (from memory): class A is half a scale
# division and class B one division (from memory). Its clause 7 states that these errors are
# the maximum permissible error at any point on the scale and the largest permissible
# difference between the errors at any two points (wording checked against a public preview of
# the standard's text).
_ISO_4788_mL = {
    5.0: (0.05, 0.10),
    10.0: (0.10, 0.20),
    25.0: (0.25, 0.50),
    50.0: (0.50, 1.00),
    100.0: (0.50, 1.00),
    250.0: (1.00, 2.00),
    500.0: (2.50, 5.00),
    1000.0: (5.00, 10.00),
    2000.0: (10.00, 20.00),
}

#: ISO 4788:2005 Table 1 smallest scale division [mL] by nominal capacity [mL] (from memory);
#: the default reading resolution of a graduated cylinder.
ISO_4788_DIVISIONS_mL: Mapping[float, float] = MappingProxyType(
    {
        5.0: 0.1,
        10.0: 0.2,
        25.0: 0.5,
        50.0: 1.0,
        100.0: 1.0,
        250.0: 2.0,
        500.0: 5.0,
        1000.0: 10.0,
        2000.0: 20.0,
    }
)

#: ISO 8655-2:2002 Table 1, single-channel piston pipettes (from memory): nominal volume [µL] ->
#: (maximum permissible systematic error [µL], maximum permissible random error as a standard
#: deviation [µL]). Relative limits of the table: 2 µL 8.0 %/4.0 %; 5 µL 2.5 %/1.5 %;
#: 10 µL 1.2 %/0.8 %; 20 µL 1.0 %/0.5 %; 50 µL 1.0 %/0.4 %; 100 to 5000 µL 0.8 %/0.3 %;
#: 10000 µL 0.6 %/0.3 % (all from memory).
ISO_8655_2_ERRORS_uL: Mapping[float, tuple[float, float]] = MappingProxyType(
    {
        2.0: (0.16, 0.08),
        5.0: (0.125, 0.075),
        10.0: (0.12, 0.08),
        20.0: (0.20, 0.10),
        50.0: (0.50, 0.20),
        100.0: (0.80, 0.30),
        200.0: (1.60, 0.60),
        500.0: (4.0, 1.5),
        1000.0: (8.0, 3.0),
        2000.0: (16.0, 6.0),
        5000.0: (40.0, 15.0),
        10000.0: (60.0, 30.0),
    }
)

#: Default tolerance tables: kind -> class (``"A"``, ``"B"``) -> {nominal [mL]: maximum
#: permissible error [mL]}. Piston pipettes are in :data:`ISO_8655_2_ERRORS_uL`.
ISO_TOLERANCES_mL: Mapping[str, Mapping[str, Mapping[float, float]]] = MappingProxyType(
    {
        "transfer-pipette": _by_class(_ISO_648_mL),
        "volumetric-flask": _by_class(_ISO_1042_mL),
        "buret": _by_class(_ISO_385_mL),
        "graduated-pipette": _by_class(_ISO_835_mL),
        "graduated-cylinder": _by_class(_ISO_4788_mL),
    }
)

# ---------------------------------------------------------------------------------------------
# ASTM tables (alternative, for glassware marked to ASTM).
# ---------------------------------------------------------------------------------------------

# ASTM E969-02 (Reapproved 2012), Table 1, capacity tolerance [mL] (class A, class B). Rows
# 0.5 to 7 mL were checked against the Table 1 excerpt of the standard's public preview; note
# that class B is 0.03 mL, not twice class A, at 6 and 7 mL. Rows from 10 mL up are from memory.
_ASTM_E969_mL = {
    0.5: (0.006, 0.012),
    1.0: (0.006, 0.012),
    2.0: (0.006, 0.012),
    3.0: (0.01, 0.02),
    4.0: (0.01, 0.02),
    5.0: (0.01, 0.02),
    6.0: (0.01, 0.03),
    7.0: (0.01, 0.03),
    10.0: (0.02, 0.04),
    15.0: (0.03, 0.06),
    20.0: (0.03, 0.06),
    25.0: (0.03, 0.06),
    50.0: (0.05, 0.10),
    100.0: (0.08, 0.16),
}

# ASTM E288-10, Table 1, class A capacity tolerance [mL] (from memory). Section 1.1.2: class B
# tolerances are within twice the class A range (checked against the standard's scope text).
_ASTM_E288_CLASS_A_mL = {
    5.0: 0.02,
    10.0: 0.02,
    25.0: 0.03,
    50.0: 0.05,
    100.0: 0.08,
    200.0: 0.10,
    250.0: 0.12,
    500.0: 0.20,
    1000.0: 0.30,
    2000.0: 0.50,
}

# ASTM E287-02 (Reapproved 2019), Table 1, class A tolerance [mL] (from memory). Section 4.1
# covers 10, 25, 50 and 100 mL burets only, and section 1.1.2 makes class B twice class A (both
# checked against the standard's scope text).
_ASTM_E287_CLASS_A_mL = {
    10.0: 0.02,
    25.0: 0.03,
    50.0: 0.05,
    100.0: 0.10,
}

#: ASTM tolerance tables, same layout as :data:`ISO_TOLERANCES_mL`.
ASTM_TOLERANCES_mL: Mapping[str, Mapping[str, Mapping[float, float]]] = MappingProxyType(
    {
        "transfer-pipette": _by_class(_ASTM_E969_mL),
        "volumetric-flask": _by_class(_twice_class_a(_ASTM_E288_CLASS_A_mL)),
        "buret": _by_class(_twice_class_a(_ASTM_E287_CLASS_A_mL)),
    }
)

_TABLES: Mapping[str, Mapping[str, Mapping[str, Mapping[float, float]]]] = MappingProxyType(
    {"ISO": ISO_TOLERANCES_mL, "ASTM": ASTM_TOLERANCES_mL}
)

#: Where each table comes from, by (standard family, kind), for sheets and error hints.
TOLERANCE_SOURCES: Mapping[tuple[str, str], str] = MappingProxyType(
    {
        ("ISO", "transfer-pipette"): "ISO 648:2008 Table 1",
        ("ISO", "volumetric-flask"): "ISO 1042:1998 Table 1",
        ("ISO", "buret"): "ISO 385:2005 Table 1",
        ("ISO", "graduated-pipette"): "ISO 835:2007 Tables 1-4",
        ("ISO", "graduated-cylinder"): "ISO 4788:2005 Table 1",
        ("ISO", "piston-pipette"): "ISO 8655-2:2002 Table 1",
        ("ASTM", "transfer-pipette"): "ASTM E969-02 Table 1",
        ("ASTM", "volumetric-flask"): "ASTM E288-10 Table 1",
        ("ASTM", "buret"): "ASTM E287-02 Table 1",
    }
)


# ---------------------------------------------------------------------------------------------
# Small helpers
# ---------------------------------------------------------------------------------------------


def _format_number(value: float) -> str:
    """Shortest plain decimal for a size in a message (5.0 -> '5', 0.5 -> '0.5')."""
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    return text or "0"


def _sizes_hint(sizes: Sequence[float], unit: str) -> str:
    return ", ".join(_format_number(size) for size in sorted(sizes)) + f" {unit}"


def _lookup(table: Mapping[float, _V], size: float) -> _V | None:
    """Row of ``table`` whose key equals ``size`` within 1e-9 (relative), else None."""
    for key, row in table.items():
        if math.isclose(key, size, rel_tol=_SIZE_MATCH_mL, abs_tol=_SIZE_MATCH_mL):
            return row
    return None


def _to_pL(volume_mL: float) -> int:
    """Volume [mL] -> nearest integer picolitres [pL]."""
    return round(volume_mL * _PL_PER_ML)


def _check_kind(device: Device) -> None:
    if device.kind not in DEVICE_KINDS:
        raise InvalidInputError(
            "unknown glassware kind",
            field="kind",
            value=device.kind,
            hint=f"use one of {', '.join(DEVICE_KINDS)}",
        )


def _capacity_mL(device: Device) -> float:
    """Largest single delivery or content [mL]; for a piston pipette the top of its range."""
    if device.kind == "piston-pipette" and device.range_uL is not None:
        return device.range_uL[1] / _UL_PER_ML
    return device.volume_mL


def _is_fixed_volume(device: Device) -> bool:
    """True for devices with one delivered (or contained) volume: the nominal one."""
    return device.kind in {"transfer-pipette", "volumetric-flask"} or (
        device.kind == "piston-pipette" and device.range_uL is None
    )


def _check_volume(device: Device, volume_mL: float | None) -> float:
    """The volume a tolerance is asked for [mL], checked against what the device holds."""
    capacity_mL = _capacity_mL(device)
    if volume_mL is None:
        return capacity_mL
    tolerance_mL = _SIZE_MATCH_mL * max(1.0, capacity_mL)
    if _is_fixed_volume(device):
        if not math.isclose(volume_mL, capacity_mL, abs_tol=tolerance_mL, rel_tol=0.0):
            raise InvalidInputError(
                f"a {device.kind} delivers only its nominal volume",
                field="volume_mL",
                value=volume_mL,
                hint=f"ask for {_format_number(capacity_mL)} mL or omit the volume",
            )
        return capacity_mL
    low_mL = 0.0
    if device.kind == "piston-pipette" and device.range_uL is not None:
        low_mL = device.range_uL[0] / _UL_PER_ML
    in_range = low_mL - tolerance_mL <= volume_mL <= capacity_mL + tolerance_mL
    if not (math.isfinite(volume_mL) and volume_mL > 0.0 and in_range):
        raise InvalidInputError(
            f"volume outside the range of {device.id}",
            field="volume_mL",
            value=volume_mL,
            hint=(
                f"give a volume from {_format_number(low_mL)} to {_format_number(capacity_mL)} mL"
            ),
        )
    return volume_mL


# ---------------------------------------------------------------------------------------------
# Tolerances and uncertainties
# ---------------------------------------------------------------------------------------------


def table_tolerance_mL(
    kind: str, device_class: str, nominal_mL: float, *, standard: str = "ISO"
) -> float:
    """Maximum permissible error of a device of this kind, class and size from a standard.

    Parameters
    ----------
    kind
        A glassware kind of :data:`planner.inputs.DEVICE_KINDS` other than ``"tube"``.
    device_class
        ``"A"`` or ``"B"``; ignored for piston pipettes, whose standard has no classes.
    nominal_mL
        Nominal capacity [mL]; for a piston pipette its nominal (largest) volume.
    standard
        ``"ISO"`` (default; every kind) or ``"ASTM"`` (transfer pipettes, volumetric flasks
        and burets).

    Returns
    -------
    float
        Maximum permissible error at nominal volume [mL].

    Raises
    ------
    InvalidInputError
        For a kind, class or standard without a table (field ``kind``, ``device_class`` or
        ``standard``), or a size the table does not hold (field ``volume_mL``; the hint lists
        the sizes it holds).

    Examples
    --------
    >>> table_tolerance_mL("transfer-pipette", "A", 10.0)
    0.02
    """
    if standard not in _TABLES:
        raise InvalidInputError(
            "unknown tolerance standard",
            field="standard",
            value=standard,
            hint="use 'ISO' or 'ASTM'",
        )
    if kind == "piston-pipette":
        if standard != "ISO":
            raise InvalidInputError(
                "piston pipettes are specified by ISO 8655-2 only",
                field="standard",
                value=standard,
                hint="use standard='ISO'",
            )
        row = _lookup(ISO_8655_2_ERRORS_uL, nominal_mL * _UL_PER_ML)
        if row is None:
            raise InvalidInputError(
                "no ISO 8655-2:2002 Table 1 row for this nominal volume",
                field="volume_mL",
                value=nominal_mL,
                hint=(
                    f"the table holds {_sizes_hint(list(ISO_8655_2_ERRORS_uL), 'µL')}; "
                    "or give the device a tolerance_mL"
                ),
            )
        return row[0] / _UL_PER_ML
    tables = _TABLES[standard]
    if kind not in tables:
        if kind in DEVICE_KINDS:
            hint = (
                "a tube is a vessel without a tolerance"
                if kind == "tube"
                else f"use standard='ISO' or give the device a tolerance_mL ({kind})"
            )
            problem = f"no {standard} tolerance table for this kind"
        else:
            hint = f"use one of {', '.join(DEVICE_KINDS)}"
            problem = "unknown glassware kind"
        raise InvalidInputError(problem, field="kind", value=kind, hint=hint)
    if device_class not in _DEVICE_CLASSES:
        raise InvalidInputError(
            "tolerance class must be A or B",
            field="device_class",
            value=device_class,
            hint="use class 'A' or 'B', or give the device a tolerance_mL",
        )
    table = tables[kind][device_class]
    tolerance = _lookup(table, nominal_mL)
    if tolerance is None:
        source = TOLERANCE_SOURCES[(standard, kind)]
        raise InvalidInputError(
            f"no {source} row for a {kind} of this size",
            field="volume_mL",
            value=nominal_mL,
            hint=(
                f"the table holds {_sizes_hint(list(table), 'mL')}; "
                "or give the device a tolerance_mL"
            ),
        )
    return tolerance


def piston_errors_uL(device: Device, volume_uL: float) -> tuple[float, float]:
    """ISO 8655-2 limits of a piston pipette at a setting.

    Parameters
    ----------
    device
        A ``"piston-pipette"``; variable when it has ``range_uL``, else fixed at ``volume_mL``.
    volume_uL
        The selected volume [µL], inside the pipette's range.

    Returns
    -------
    tuple of float
        (maximum permissible systematic error [µL], maximum permissible random error expressed
        as a standard deviation [µL]).

    Raises
    ------
    InvalidInputError
        Not a piston pipette (field ``kind``); a setting outside the range (field
        ``volume_mL``); a nominal volume ISO 8655-2 Table 1 does not list (field ``volume_mL``).

    Notes
    -----
    For a variable-volume pipette the nominal volume is the largest selectable volume, and
    ISO 8655-2:2002 applies the limits it tabulates *in microlitres* at the nominal volume to
    every selectable volume (from memory). Below nominal the absolute limits therefore stay the
    same and the relative error grows: a 100-1000 µL pipette may err by ±8 µL at 100 µL as at
    1000 µL. The 2022 edition tabulates separate limits at 10 %, 50 % and 100 % of nominal
    (from memory); those are not used here.

    A ``tolerance_mL`` on the device replaces the systematic limit (at every setting, as
    above); the random limit still comes from the table.
    """
    if device.kind != "piston-pipette":
        raise InvalidInputError(
            "ISO 8655-2 limits apply to piston pipettes only",
            field="kind",
            value=device.kind,
            hint="use tolerance_mL for glassware",
        )
    _check_volume(device, volume_uL / _UL_PER_ML)
    nominal_uL = _capacity_mL(device) * _UL_PER_ML
    row = _lookup(ISO_8655_2_ERRORS_uL, nominal_uL)
    if row is None:
        raise InvalidInputError(
            "no ISO 8655-2:2002 Table 1 row for this nominal volume",
            field="volume_mL",
            value=nominal_uL / _UL_PER_ML,
            hint=(
                f"the table holds {_sizes_hint(list(ISO_8655_2_ERRORS_uL), 'µL')}; "
                "a device tolerance_mL gives the systematic limit only"
            ),
        )
    systematic_uL, random_uL = row
    if device.tolerance_mL is not None:
        systematic_uL = device.tolerance_mL * _UL_PER_ML
    return systematic_uL, random_uL


def tolerance_mL(device: Device, volume_mL: float | None = None) -> float:
    """Maximum permissible error of one delivery (or of a flask's content) [mL].

    Parameters
    ----------
    device
        Any kind except ``"tube"``.
    volume_mL
        Volume delivered [mL]; ``None`` means the nominal volume. A transfer pipette or flask
        accepts only its nominal volume; graded devices accept any volume in their range.

    Returns
    -------
    float
        The device's own ``tolerance_mL`` when the plan gives one, else the ISO table value
        for its kind, class and nominal size [mL].

    Raises
    ------
    InvalidInputError
        A tube (field ``kind``), a volume the device cannot deliver (field ``volume_mL``), a
        class other than A/B (field ``device_class``), or a size the table does not hold
        (field ``volume_mL``, the hint lists the sizes it holds).

    Notes
    -----
    Graduated pipettes, burets and graduated cylinders: the maximum permissible error of the
    nominal capacity applies to any delivered volume, because the standards state it as the
    limit at any point of the scale and for the difference between any two points (ISO 385,
    ISO 835, from memory; ISO 4788 clause 7, checked). A part delivery is therefore not
    credited with a smaller error, which is conservative.

    Piston pipettes: the ISO 8655-2 systematic limit at the setting, see
    :func:`piston_errors_uL` for how settings below nominal are treated. The random limit is
    not added here.
    """
    _check_kind(device)
    if device.kind == "tube":
        raise InvalidInputError(
            "a tube is a vessel, not a measuring device, and has no tolerance",
            field="kind",
            value=device.kind,
            hint="take the mixture volume from the additions delivered into the tube",
        )
    checked_mL = _check_volume(device, volume_mL)
    if device.tolerance_mL is not None:
        return float(device.tolerance_mL)
    if device.kind == "piston-pipette":
        return piston_errors_uL(device, checked_mL * _UL_PER_ML)[0] / _UL_PER_ML
    return table_tolerance_mL(device.kind, device.device_class, device.volume_mL)


def standard_uncertainty_mL(device: Device, volume_mL: float | None = None) -> float:
    """Standard uncertainty of one delivery from the device's tolerance [mL].

    Parameters
    ----------
    device
        Any kind except ``"tube"``.
    volume_mL
        Volume delivered [mL]; ``None`` means the nominal volume.

    Returns
    -------
    float
        u = a / sqrt(6) [mL], where a is :func:`tolerance_mL`.

    Notes
    -----
    A tolerance ±a without further information becomes a standard uncertainty through a
    triangular distribution, because values near the nominal volume are more likely than
    values at the limits: u = a / sqrt(6) (EURACHEM/CITAC Guide CG4, 3rd ed., 2012, section 8.1
    and Appendix E.1, from memory). The same rule is applied to piston pipettes; their random
    limit is available from :func:`piston_errors_uL` for a fuller model.
    """
    return tolerance_mL(device, volume_mL) / math.sqrt(6.0)


# ---------------------------------------------------------------------------------------------
# Delivery grids
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Grid:
    """Volumes one use of a device delivers: first + k * step for k in 0..count-1 [pL]."""

    first_pL: int
    step_pL: int
    count: int

    @property
    def last_pL(self) -> int:
        return self.first_pL + (self.count - 1) * self.step_pL

    def values_pL(self) -> NDArray[np.int64]:
        return self.first_pL + self.step_pL * np.arange(self.count, dtype=np.int64)

    def nearest_one_pL(self, target_pL: float) -> int:
        """Grid point nearest one target [pL]; the scalar twin of :meth:`nearest_pL`."""
        if self.step_pL == 0:
            return self.first_pL
        index = min(max(round((target_pL - self.first_pL) / self.step_pL), 0), self.count - 1)
        return self.first_pL + self.step_pL * index

    def nearest_pL(self, targets_pL: NDArray[np.float64]) -> NDArray[np.int64]:
        """Grid point nearest each target [pL] (the end points outside the range)."""
        if self.step_pL == 0:
            return np.full(targets_pL.shape, self.first_pL, dtype=np.int64)
        index = np.rint((targets_pL - self.first_pL) / self.step_pL)
        index = np.clip(index, 0, self.count - 1).astype(np.int64)
        return self.first_pL + self.step_pL * index


_NO_GRID = _Grid(0, 0, 0)


def _ceil_div(numerator: int, denominator: int) -> int:
    return -(-numerator // denominator)


def _positive_pL(value_mL: float, field: str, device: Device) -> int:
    value_pL = _to_pL(value_mL) if math.isfinite(value_mL) else 0
    if value_pL <= 0:
        raise InvalidInputError(
            f"must be a positive volume for {device.id}",
            field=field,
            value=value_mL,
            hint="give a positive number",
        )
    return value_pL


def _default_division_mL(device: Device) -> float:
    """Reading resolution when the device gives none [mL]."""
    if device.kind == "buret":
        # DESIGN.md contract detail 5: a buret reads to 0.01 mL.
        return 0.01
    if device.kind == "graduated-pipette":
        # DESIGN.md contract detail 5: 0.01 mL up to 2 mL capacity, else 0.1 mL.
        return 0.01 if device.volume_mL <= 2.0 + _SIZE_MATCH_mL else 0.1
    # Graduated cylinder: the ISO 4788 scale division of its size (from memory), else 1 % of
    # capacity (common practice).
    division = _lookup(ISO_4788_DIVISIONS_mL, device.volume_mL)
    return division if division is not None else 0.01 * device.volume_mL


def _default_min_delivery_mL(device: Device) -> float:
    """Smallest sensible delivery when the device gives none [mL]."""
    if device.kind == "buret":
        # DESIGN.md contract detail 5: 0.10 mL at least.
        return 0.10
    # Graduated pipettes and cylinders: 10 % of capacity (common practice: the meniscus
    # reading error is a large share of anything smaller).
    return 0.1 * device.volume_mL


def _grid(device: Device) -> _Grid:
    """Exact integer grid of the volumes one use of the device delivers."""
    _check_kind(device)
    if device.kind in _VESSEL_KINDS:
        return _NO_GRID
    if _is_fixed_volume(device):
        return _Grid(_positive_pL(device.volume_mL, "volume_mL", device), 0, 1)
    if device.kind == "piston-pipette":
        return _piston_grid(device)
    capacity_pL = _positive_pL(device.volume_mL, "volume_mL", device)
    division_mL = (
        device.division_mL if device.division_mL is not None else _default_division_mL(device)
    )
    division_pL = _positive_pL(division_mL, "division_mL", device)
    min_mL = (
        device.min_delivery_mL
        if device.min_delivery_mL is not None
        else _default_min_delivery_mL(device)
    )
    # Readings are differences of two marks, so deliveries are whole divisions; a delivery of
    # zero divisions is no delivery.
    first_k = max(1, _ceil_div(_to_pL(min_mL), division_pL))
    last_k = capacity_pL // division_pL
    count = max(0, last_k - first_k + 1)
    return _Grid(first_k * division_pL, division_pL, count)


def _piston_grid(device: Device) -> _Grid:
    assert device.range_uL is not None  # fixed-volume pipettes are handled by the caller
    low_uL, high_uL = device.range_uL
    if device.step_uL is None:
        raise InvalidInputError(
            f"a variable piston pipette needs its setting step ({device.id})",
            field="step_uL",
            value=None,
            hint="give step_uL, e.g. 1 for a 100-1000 µL pipette",
        )
    low_pL = round(low_uL * _PL_PER_UL)
    high_pL = round(high_uL * _PL_PER_UL)
    step_pL = round(device.step_uL * _PL_PER_UL)
    if not (0 < low_pL <= high_pL):
        raise InvalidInputError(
            f"piston pipette range must be 0 < low <= high ({device.id})",
            field="range_uL",
            value=device.range_uL,
            hint="give [low, high] in µL, e.g. [100, 1000]",
        )
    if step_pL <= 0:
        raise InvalidInputError(
            f"piston pipette step must be positive ({device.id})",
            field="step_uL",
            value=device.step_uL,
            hint="give the setting step in µL, e.g. 1",
        )
    first_k = 0
    if device.min_delivery_mL is not None:
        first_k = max(0, _ceil_div(_to_pL(device.min_delivery_mL) - low_pL, step_pL))
    last_k = (high_pL - low_pL) // step_pL
    count = max(0, last_k - first_k + 1)
    return _Grid(low_pL + first_k * step_pL, step_pL, count)


def reading_count(device: Device) -> int:
    """How many volumes one use of the device can deliver, without listing them.

    Parameters
    ----------
    device
        Any glassware kind.

    Returns
    -------
    int
        ``len(single_volumes_mL(device))`` [unitless]: 1 for a fixed-volume device, 0 for a
        vessel. Cheap for any division or step, so a plan reader can refuse a grid too fine
        to list before anything allocates it.

    Raises
    ------
    InvalidInputError
        As :func:`single_volumes_mL`.
    """
    return _grid(device).count


def single_volumes_mL(device: Device) -> NDArray[np.float64]:
    """Every volume one use of the device can deliver, ascending [mL].

    Parameters
    ----------
    device
        Any glassware kind.

    Returns
    -------
    numpy.ndarray
        Shape (n,), rounded to 1e-9 mL [mL]:

        - transfer pipette, fixed piston pipette (no ``range_uL``): its nominal volume;
        - graduated pipette: multiples of ``division_mL`` (default 0.01 mL up to 2 mL
          capacity, else 0.1 mL; DESIGN.md contract detail 5) from ``min_delivery_mL``
          (default 10 % of capacity, common practice) to capacity;
        - buret: multiples of ``division_mL`` (default 0.01 mL) from ``min_delivery_mL``
          (default 0.10 mL; contract detail 5) to capacity;
        - piston pipette: ``range_uL`` low to high in ``step_uL`` (from the first setting at or
          above ``min_delivery_mL`` when given);
        - graduated cylinder: multiples of ``division_mL`` (default the ISO 4788 scale division
          of its size, from memory, else 1 % of capacity, common practice) from 10 % of
          capacity (common practice) to capacity;
        - volumetric flask, tube: empty (vessels, not delivery devices).

    Raises
    ------
    InvalidInputError
        An unknown kind (field ``kind``), a non-positive size, division or step, or a variable
        piston pipette without ``step_uL``.

    Examples
    --------
    >>> single_volumes_mL(Device(kind="buret", volume_mL=25.0))[[0, -1]].tolist()
    [0.1, 25.0]
    """
    values_pL = _grid(device).values_pL()
    return np.round(values_pL / _PL_PER_ML, 9)


# ---------------------------------------------------------------------------------------------
# Combinations of deliveries
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class DeliverableVolume:
    """A volume the shelf can deliver and every way to deliver it.

    Attributes
    ----------
    volume_mL
        The volume [mL], rounded to 1e-9 mL.
    options
        Each option is a tuple of device ids (``Device.id``), one per delivery; a repeated
        delivery repeats the id. Ordered fewest deliveries first, then smallest combined
        standard uncertainty, then by the ids. Inside an option, fixed-volume devices come
        first (largest first), then the graded device.
    """

    volume_mL: float
    options: tuple[tuple[str, ...], ...]

    @property
    def best(self) -> tuple[str, ...]:
        """The preferred option: fewest deliveries, then smallest uncertainty."""
        return self.options[0]


@dataclass(frozen=True, slots=True)
class _Template:
    """A multiset of fixed deliveries plus at most one graded delivery."""

    option: tuple[str, ...]
    fixed_pL: int
    graded: _Grid | None
    u_mL: float


def devices_by_id(glassware: Sequence[Device]) -> dict[str, Device]:
    """Map each device id to its device.

    Parameters
    ----------
    glassware
        The shelf.

    Returns
    -------
    dict
        ``Device.id`` -> device, in shelf order. Identical repeated entries collapse to one.

    Raises
    ------
    InvalidInputError
        Two different devices share an id (ids are kind plus size, so for example a class A
        and a class B 10 mL transfer pipette cannot both be listed); field ``glassware``.
    """
    shelf: dict[str, Device] = {}
    for device in glassware:
        known = shelf.setdefault(device.id, device)
        if known != device:
            raise InvalidInputError(
                "two different devices share one id",
                field="glassware",
                value=device.id,
                hint="list each kind and size once (ids are kind plus size)",
            )
    return shelf


def _fixed_multisets(
    fixed: Sequence[tuple[str, int, float]], max_count: int, limit_pL: int
) -> list[tuple[tuple[str, ...], int, float]]:
    """All multisets of at most ``max_count`` fixed deliveries with sum <= limit.

    Items of ``fixed`` are (id, volume [pL], u² [mL²]); multisets keep the order of ``fixed``
    (indices never decrease), so each is produced once. Returns (ids, sum [pL], sum of u²).
    """
    found: list[tuple[tuple[str, ...], int, float]] = []

    def extend(start: int, ids: tuple[str, ...], total_pL: int, u2: float) -> None:
        found.append((ids, total_pL, u2))
        if len(ids) == max_count:
            return
        for index in range(start, len(fixed)):
            device_id, volume_pL, device_u2 = fixed[index]
            if total_pL + volume_pL <= limit_pL:
                extend(index, (*ids, device_id), total_pL + volume_pL, u2 + device_u2)

    extend(0, (), 0, 0.0)
    return found


def _templates(glassware: Sequence[Device], max_deliveries: int, high_pL: int) -> list[_Template]:
    """Every option shape of :func:`deliverable_volumes`, best first (see its Notes)."""
    fixed: list[tuple[str, int, float]] = []
    graded: list[tuple[str, _Grid, float]] = []
    for device_id, device in devices_by_id(glassware).items():
        grid = _grid(device)
        if grid.count == 0:
            continue
        u2 = standard_uncertainty_mL(device) ** 2
        if grid.count == 1:
            fixed.append((device_id, grid.first_pL, u2))
        else:
            graded.append((device_id, grid, u2))
    # Largest fixed volume first inside an option (7 mL reads "5 mL + 2 mL").
    fixed.sort(key=lambda item: (-item[1], item[0]))

    templates: list[_Template] = []
    for ids, total_pL, u2 in _fixed_multisets(fixed, max_deliveries, high_pL):
        if ids:
            templates.append(_Template(ids, total_pL, None, math.sqrt(u2)))
        if len(ids) < max_deliveries:
            for device_id, grid, grid_u2 in graded:
                if total_pL + grid.first_pL <= high_pL:
                    option = (*ids, device_id)
                    templates.append(_Template(option, total_pL, grid, math.sqrt(u2 + grid_u2)))
    # Rounding u to 1e-12 mL keeps ties that differ only by float summation order as ties.
    templates.sort(key=lambda t: (len(t.option), round(t.u_mL, 12), t.option))

    return templates


def _entry_count(templates: Sequence[_Template]) -> int:
    """Volumes the templates list before duplicates merge (an upper bound on the work)."""
    return sum(1 if t.graded is None else t.graded.count for t in templates)


def combination_count(
    glassware: Sequence[Device], *, max_volume_mL: float, max_deliveries: int = 3
) -> int:
    """How many (option, volume) pairs :func:`deliverable_volumes` would list, cheaply.

    Parameters
    ----------
    glassware
        The shelf.
    max_volume_mL
        Largest volume wanted [mL].
    max_deliveries
        Most deliveries in one option [unitless].

    Returns
    -------
    int
        The number of pairs before equal volumes merge [unitless]; ``deliverable_volumes``
        refuses a shelf with more than :data:`MAX_COMBINATIONS`.
    """
    return _entry_count(_templates(glassware, max_deliveries, _to_pL(max_volume_mL) + 1))


def deliverable_volumes(
    glassware: Sequence[Device],
    *,
    max_volume_mL: float,
    max_deliveries: int = 3,
    min_volume_mL: float = 0.0,
) -> tuple[DeliverableVolume, ...]:
    """Every volume the shelf can deliver with up to ``max_deliveries`` deliveries.

    Parameters
    ----------
    glassware
        The shelf. Vessels (flasks, tubes) deliver nothing and are skipped.
    max_volume_mL
        Largest volume wanted [mL] (inclusive, +1e-9 mL).
    max_deliveries
        Most deliveries in one option [unitless], at least 1.
    min_volume_mL
        Smallest volume wanted [mL] (inclusive, -1e-9 mL). Zero deliveries (0 mL) are never
        listed.

    Returns
    -------
    tuple of DeliverableVolume
        Ascending by volume; each with every option found, best first.

    Raises
    ------
    InvalidInputError
        ``max_deliveries`` < 1 or a non-finite volume bound; any error of
        :func:`standard_uncertainty_mL` or :func:`single_volumes_mL` for a device on the shelf.

    Notes
    -----
    Devices with one volume (transfer pipettes, fixed piston pipettes, graded devices whose
    range holds a single reading) are *fixed*; devices with several readings (graduated
    pipettes, burets, variable piston pipettes, cylinders) are *graded*. An option is a
    multiset of fixed deliveries plus **at most one graded delivery**. Two graded deliveries
    are not enumerated: any volume on a graded device's grid already needs only one delivery,
    and pairs or triples of thousand-point grids would give millions of options for nothing
    better. Every volume a single device can deliver therefore appears, with its
    single-delivery option. :func:`is_deliverable` still accepts options with several graded
    deliveries (a hand-written plan may use them).

    Every tolerance here is independent of the delivered volume (full-capacity rule for
    graded glassware; absolute ISO 8655-2 limits for piston pipettes), so an option's combined
    uncertainty is fixed and the options are ranked once, not per volume.
    """
    if max_deliveries < 1:
        raise InvalidInputError(
            "at least one delivery is needed",
            field="max_deliveries",
            value=max_deliveries,
            hint="give max_deliveries >= 1",
        )
    for name, bound in (("max_volume_mL", max_volume_mL), ("min_volume_mL", min_volume_mL)):
        if not math.isfinite(bound):
            raise InvalidInputError(
                "volume bound must be finite", field=name, value=bound, hint="give a number"
            )
    high_pL = _to_pL(max_volume_mL) + int(_MATCH_PL)
    low_pL = max(1, _to_pL(min_volume_mL) - int(_MATCH_PL))
    if high_pL < low_pL:
        return ()

    templates = _templates(glassware, max_deliveries, high_pL)
    entries = _entry_count(templates)
    if entries > MAX_COMBINATIONS:
        # Guard found by fuzzing: twenty pipettes and twenty finely read graded devices gave
        # about 1e8 combinations (25 s, 5 GB); refuse before allocating them.
        raise InvalidInputError(
            f"the shelf gives {entries} ways to deliver volumes up to "
            f"{_format_number(max_volume_mL)} mL, more than the {MAX_COMBINATIONS} the "
            "planner lists",
            field="glassware",
            value=len(glassware),
            hint="list fewer devices, or give graduated devices a coarser division_mL "
            "(piston pipettes a coarser step_uL)",
        )

    volume_parts: list[NDArray[np.int64]] = []
    rank_parts: list[NDArray[np.int64]] = []
    for rank, template in enumerate(templates):
        if template.graded is None:
            volumes_pL = np.array([template.fixed_pL], dtype=np.int64)
        else:
            volumes_pL = template.fixed_pL + template.graded.values_pL()
        volumes_pL = volumes_pL[(volumes_pL >= low_pL) & (volumes_pL <= high_pL)]
        volume_parts.append(volumes_pL)
        rank_parts.append(np.full(volumes_pL.shape, rank, dtype=np.int64))
    if not volume_parts:
        return ()
    all_volumes_pL = np.concatenate(volume_parts)
    all_ranks = np.concatenate(rank_parts)
    if all_volumes_pL.size == 0:
        return ()
    order = np.lexsort((all_ranks, all_volumes_pL))
    sorted_volumes_pL = all_volumes_pL[order]
    sorted_ranks = all_ranks[order].tolist()
    starts = np.flatnonzero(np.diff(sorted_volumes_pL)) + 1
    bounds = [0, *starts.tolist(), len(sorted_ranks)]
    volumes_mL = np.round(sorted_volumes_pL[bounds[:-1]] / _PL_PER_ML, 9).tolist()
    options_by_rank = [template.option for template in templates]
    return tuple(
        DeliverableVolume(
            volume_mL=volume_mL,
            options=tuple(options_by_rank[rank] for rank in sorted_ranks[start:end]),
        )
        for volume_mL, start, end in zip(volumes_mL, bounds[:-1], bounds[1:], strict=True)
    )


def _graded_parts(grids: Sequence[_Grid], target_pL: float) -> list[int] | None:
    """Readings, one per grid, that sum to the target within 1 pL, or None."""
    head = grids[0]
    if len(grids) == 1:
        point = head.nearest_one_pL(target_pL)
        return [point] if abs(point - target_pL) <= _MATCH_PL else None
    rest = grids[1:]
    rest_low_pL = sum(grid.first_pL for grid in rest)
    rest_high_pL = sum(grid.last_pL for grid in rest)
    candidates_pL = head.values_pL()
    remainders_pL = target_pL - candidates_pL
    keep = (remainders_pL >= rest_low_pL - _MATCH_PL) & (remainders_pL <= rest_high_pL + _MATCH_PL)
    candidates_pL = candidates_pL[keep]
    if len(rest) == 1:
        # Two graded deliveries: test every reading of the first at once.
        remainders_pL = target_pL - candidates_pL.astype(np.float64)
        points_pL = rest[0].nearest_pL(remainders_pL)
        hits = np.flatnonzero(np.abs(points_pL - remainders_pL) <= _MATCH_PL)
        if hits.size == 0:
            return None
        return [int(candidates_pL[hits[0]]), int(points_pL[hits[0]])]
    for candidate_pL in candidates_pL.tolist():
        parts = _graded_parts(rest, target_pL - candidate_pL)
        if parts is not None:
            return [candidate_pL, *parts]
    return None


def _split_pL(
    shelf: Mapping[str, Device], option: Sequence[str], target_pL: float
) -> list[int] | None:
    """What each delivery of the option gives [pL] to make the target, or None if it cannot."""
    readings_pL = [0] * len(option)
    fixed_total_pL = 0
    graded: list[tuple[int, _Grid]] = []
    for position, device_id in enumerate(option):
        grid = _grid(shelf[device_id])
        if grid.count == 0:
            return None
        if grid.count == 1:
            readings_pL[position] = grid.first_pL
            fixed_total_pL += grid.first_pL
        else:
            graded.append((position, grid))
    remainder_pL = target_pL - fixed_total_pL
    if not graded:
        return readings_pL if abs(remainder_pL) <= _MATCH_PL else None
    parts_pL = _graded_parts([grid for _, grid in graded], remainder_pL)
    if parts_pL is None:
        return None
    for (position, _), part_pL in zip(graded, parts_pL, strict=True):
        readings_pL[position] = part_pL
    return readings_pL


def is_deliverable(glassware: Sequence[Device], volume_mL: float, option: Sequence[str]) -> bool:
    """Whether the named devices can deliver exactly this volume.

    Parameters
    ----------
    glassware
        The shelf.
    volume_mL
        Volume to deliver [mL].
    option
        Device ids, one per delivery (a repeated id is a repeated delivery).

    Returns
    -------
    bool
        True when every id is on the shelf and the nominal volumes of the fixed devices plus
        one reading on each graded device's grid (:func:`single_volumes_mL`) sum to
        ``volume_mL`` within 1e-9 mL. False for an empty option, a non-positive volume, or a
        vessel in the option (filling a flask to the mark is not a delivery).

    Notes
    -----
    Checked from the devices directly, not looked up in :func:`deliverable_volumes`, so that
    an independent verifier can use it. Several graded deliveries in one option are allowed.
    """
    if not option or not math.isfinite(volume_mL) or volume_mL <= 0.0:
        return False
    shelf = devices_by_id(glassware)
    if any(device_id not in shelf for device_id in option):
        return False
    return _split_pL(shelf, option, volume_mL * _PL_PER_ML) is not None


def combination_uncertainty_mL(
    devices: Mapping[str, Device], option: Sequence[str], volume_mL: float
) -> float:
    """Combined standard uncertainty of delivering a volume with an option [mL].

    Parameters
    ----------
    devices
        Device id -> device, e.g. from :func:`devices_by_id`.
    option
        Device ids, one per delivery.
    volume_mL
        Total volume delivered [mL].

    Returns
    -------
    float
        Root sum of squares of the deliveries' standard uncertainties [mL]. Fixed devices
        deliver their nominal volume; a graded device delivers the rest, ``volume_mL`` minus
        the fixed parts (with several graded devices, the first split found on their grids).

    Raises
    ------
    InvalidInputError
        An empty option or an id not in ``devices`` (field ``option``); an option that cannot
        deliver the volume (field ``volume_mL``; check with :func:`is_deliverable` first).

    Notes
    -----
    Deliveries are independent, so their variances add (JCGM 100:2008, GUM, eq. 10, with unit
    sensitivity coefficients).
    """
    if not option:
        raise InvalidInputError(
            "an option needs at least one delivery",
            field="option",
            value=tuple(option),
            hint="name the device ids, one per delivery",
        )
    for device_id in option:
        if device_id not in devices:
            raise InvalidInputError(
                "device not on the shelf",
                field="option",
                value=device_id,
                hint=f"use one of {', '.join(sorted(devices))}",
            )
    readings_pL = _split_pL(devices, option, volume_mL * _PL_PER_ML)
    if readings_pL is None:
        raise InvalidInputError(
            f"the option {' + '.join(option)} cannot deliver this volume",
            field="volume_mL",
            value=volume_mL,
            hint="choose an option from deliverable_volumes or check with is_deliverable",
        )
    variance_mL2 = 0.0
    for device_id, reading_pL in zip(option, readings_pL, strict=True):
        variance_mL2 += standard_uncertainty_mL(devices[device_id], reading_pL / _PL_PER_ML) ** 2
    return math.sqrt(variance_mL2)
