"""Glassware tolerances: maximum permissible errors and standard uncertainties per device.

The volumes a shelf can deliver are in :mod:`planner.lab.deliveries`.

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
from types import MappingProxyType
from typing import TypeVar

from planner.errors import InvalidInputError
from planner.inputs import DEVICE_KINDS, Device

__all__ = [
    "TOLERANCE_SOURCES",
    "ASTM_TOLERANCES_mL",
    "ISO_4788_DIVISIONS_mL",
    "ISO_8655_2_ERRORS_uL",
    "ISO_TOLERANCES_mL",
    "piston_errors_uL",
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
