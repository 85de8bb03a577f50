"""The volumes a shelf can deliver: per-device grids and combinations of deliveries.

A recipe may only ask for volumes that the glassware on the bench can actually deliver. This
module lists every volume one use of a device can deliver, on an exact integer grid, and every
way to make a volume from several deliveries, fewest deliveries first (a graduated cylinder only
where nothing else makes the volume), with the combination's
standard uncertainty from :mod:`planner.lab.tolerances`.

Volumes are handled internally as integers in picolitres (1 pL = 1e-9 mL), so that grids such
as 0.10, 0.11, ... 25.00 mL never drift (0.1 + 0.2 != 0.3 in floats) and two deliveries that
should give the same volume always do. Public functions take and return millilitres.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np
from numpy.typing import NDArray

from planner.errors import InvalidInputError
from planner.inputs import Device
from planner.lab.tolerances import (
    _MATCH_PL,
    _PL_PER_ML,
    _PL_PER_UL,
    _UL_PER_ML,
    _VESSEL_KINDS,
    ISO_4788_DIVISIONS_mL,
    _check_kind,
    _format_number,
    _is_fixed_volume,
    _lookup,
    _SIZE_MATCH_mL,
    _to_pL,
    standard_uncertainty_mL,
)
from planner.records import record

__all__ = [
    "MAX_COMBINATIONS",
    "MAX_DELIVERIES",
    "MAX_GRADED_SUMS",
    "Aliquots",
    "DeliverableVolume",
    "Delivery",
    "VolumeTable",
    "combination_count",
    "combination_uncertainty_mL",
    "deliverable_volumes",
    "delivers",
    "devices_by_id",
    "is_deliverable",
    "reading_count",
    "reading_step_mL",
    "shelf_device",
    "single_volumes_mL",
    "volume_table",
]

#: Most (option, volume) pairs :func:`deliverable_volumes` lists. Thirty catalogue devices
#: give at most about 1.2 million; 1.6e7 took 2.7 s and 660 MB, and 9e7 (twenty pipettes
#: with twenty finely read graded devices, found by fuzzing) 25 s and 5 GB.
MAX_COMBINATIONS = 5_000_000


# ---------------------------------------------------------------------------------------------
# Delivery grids
# ---------------------------------------------------------------------------------------------


@record
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


def reading_step_mL(device: Device) -> float | None:
    """The finest step a device delivers in [mL]: a graduated device's division (its own, or
    the default of :func:`_default_division_mL`), a piston pipette's setting step; None for
    fixed-volume glassware and vessels, which deliver one volume."""
    if device.kind in _VESSEL_KINDS or _is_fixed_volume(device):
        return None
    if device.kind == "piston-pipette":
        return (device.step_uL or 1.0) / _UL_PER_ML
    return device.division_mL if device.division_mL is not None else _default_division_mL(device)


def _default_min_delivery_mL(device: Device) -> float:
    """Smallest sensible delivery when the device gives none [mL]."""
    if device.kind == "buret":
        # 1.00 mL per delivery (common practice: a smaller buret delivery is mostly the two
        # reading errors and the drop at the tip); a smaller buret, its capacity.
        return min(1.0, device.volume_mL)
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
        Any glassware kind, as for :func:`single_volumes_mL`.

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


@record
class DeliverableVolume:
    """A volume the shelf can deliver and every way to deliver it.

    Attributes
    ----------
    volume_mL
        The volume [mL], rounded to 1e-9 mL.
    options
        Each option is a tuple of device ids (``Device.id``), one per delivery; a repeated
        delivery repeats the id. Ordered by the last-resort devices they use (a graduated
        cylinder, :data:`LAST_RESORT_KINDS`: fewest first), then fewest deliveries, then
        smallest combined standard uncertainty, then by the ids. Inside an option,
        fixed-volume devices come first (largest first), then the graded device.
    """

    volume_mL: float
    options: tuple[tuple[str, ...], ...]

    @property
    def best(self) -> tuple[str, ...]:
        """The preferred option (the first of :attr:`options`)."""
        return self.options[0]


@record
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


def _usable(glassware: Sequence[Device]) -> list[tuple[str, _Grid, float]]:
    """Every device that delivers something (vessels left out), once per id: the id, its grid
    and its squared standard uncertainty [mL^2]."""
    return [
        (device_id, grid, standard_uncertainty_mL(device) ** 2)
        for device_id, device in devices_by_id(glassware).items()
        if (grid := _grid(device)).count > 0
    ]


#: Devices used only where nothing else on the shelf delivers the volume: a graduated
#: cylinder measures to about 1 % of its capacity (ISO 4788 class B, from memory), a
#: transfer pipette, buret or piston pipette to 0.1 to 1 %, and a cylinder is not used for a
#: quantitative transfer where a pipette can make it (common practice).
LAST_RESORT_KINDS = frozenset({"graduated-cylinder"})


def _last_resort_ids(glassware: Sequence[Device]) -> frozenset[str]:
    return frozenset(
        device_id
        for device_id, device in devices_by_id(glassware).items()
        if device.kind in LAST_RESORT_KINDS
    )


def _check_max_deliveries(max_deliveries: int) -> None:
    if max_deliveries < 1:
        raise InvalidInputError(
            "at least one delivery is needed",
            field="max_deliveries",
            value=max_deliveries,
            hint="give max_deliveries >= 1",
        )


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
    for device_id, grid, u2 in _usable(glassware):
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
    last_resort = _last_resort_ids(glassware)
    templates.sort(
        key=lambda t: (
            sum(d in last_resort for d in t.option),
            len(t.option),
            round(t.u_mL, 12),
            t.option,
        )
    )

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
    _check_max_deliveries(max_deliveries)
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


#: Most sums that the search for several graded deliveries of one addition tabulates when
#: the later deliveries' sums have gaps (most shelves' have none: see _graded_parts); a bool
#: and an int32 per sum, so about 20 MB at most.
MAX_GRADED_SUMS = 4_000_000


@record
class _Sums:
    """The sums of some grids: first_pL + unit_pL * v for v in 0..span, every v when
    ``table`` is None, else those where ``table[v]``."""

    first_pL: int
    unit_pL: int
    span: int
    table: NDArray[np.bool_] | None


def _graded_parts(grids: Sequence[_Grid], target_pL: float) -> list[int] | None:
    """Readings, one per grid, that sum to the target within 1 pL, or None.

    The readings are the first split in order of the readings: the smallest reading of the
    first grid that the others can complete, then the smallest of the second that the rest
    can complete, and so on; the last grid's reading is the one nearest to what is left.

    Notes
    -----
    The grids after the j-th sum to their firsts plus g_j * v, g_j the greatest common
    divisor of their steps and v in a set of integers (:func:`_sums_of`): the whole range
    0..span whenever the grids, by step ascending, each step (in units of g_j) at most one
    more than the range so far (the sets of consecutive readings then overlap), else a table
    of at most :data:`MAX_GRADED_SUMS` entries. The j-th grid's smallest reading k then
    solves step_j * k = D - g_j * v, a linear congruence in k with v bounded
    (:func:`_first_reading`), in one step for a range and one vector for a table: the work
    grows with the number of grids, not with the product of their reading counts (which for
    three or four finely stepped piston pipettes is beyond any search).

    Raises
    ------
    InvalidInputError
        When some later grids' sums have gaps and there are more than
        :data:`MAX_GRADED_SUMS` of them to tabulate (field ``option``).
    """
    head = grids[0]
    if len(grids) == 1:
        point = head.nearest_one_pL(target_pL)
        return [point] if abs(point - target_pL) <= _MATCH_PL else None
    lowest_pL = sum(grid.first_pL for grid in grids)
    highest_pL = sum(grid.last_pL for grid in grids)
    if not lowest_pL - _MATCH_PL <= target_pL <= highest_pL + _MATCH_PL:
        return None
    # The integer totals that match: within 1 pL of the target (the target, at most a few
    # litres in picolitres, is exact in floats to far below 1 pL, and so are T - 1, T + 1).
    totals_pL = range(math.ceil(target_pL - _MATCH_PL), math.floor(target_pL + _MATCH_PL) + 1)
    parts: list[int] = []
    remainder_pL = target_pL
    taken_pL = 0
    for j, grid in enumerate(grids[:-1]):
        rest = _sums_of(grids[j + 1 :])
        found = [
            k
            for total_pL in totals_pL
            if (k := _first_reading(grid, total_pL - taken_pL, rest)) is not None
        ]
        if not found:
            return None
        reading_pL = grid.first_pL + grid.step_pL * min(found)
        parts.append(reading_pL)
        taken_pL += reading_pL
        # The same float arithmetic as subtracting each reading in turn from the target.
        remainder_pL = remainder_pL - reading_pL
    last = grids[-1].nearest_one_pL(remainder_pL)
    if abs(last - remainder_pL) > _MATCH_PL:
        return None
    return [*parts, last]


def _sums_of(grids: Sequence[_Grid]) -> _Sums:
    """Every sum of one reading from each grid (see _graded_parts)."""
    unit_pL = math.gcd(*(grid.step_pL for grid in grids))
    steps = [(grid.step_pL // unit_pL, grid.count) for grid in grids]
    span = sum(t * (n - 1) for t, n in steps)
    first_pL = sum(grid.first_pL for grid in grids)
    # Taken by step ascending, each grid's step must not exceed the range so far plus one.
    covered = 0
    for t, n in sorted(steps):
        if t > covered + 1:
            break
        covered += t * (n - 1)
    else:
        return _Sums(first_pL, unit_pL, span, None)
    if span + 1 > MAX_GRADED_SUMS:
        raise InvalidInputError(
            f"the sums of {len(grids)} graded deliveries of this option have gaps, and "
            f"{span + 1} of them would have to be searched, more than the {MAX_GRADED_SUMS} "
            "the planner checks",
            field="option",
            value=len(grids) + 1,
            hint="state each delivery's volume (the addition's deliveries), or deliver the "
            "volume with fewer graded devices",
        )
    table = np.ones(1, dtype=np.bool_)
    for t, n in steps:
        table = _add_grid(table, t, n)
    return _Sums(first_pL, unit_pL, span, table)


def _add_grid(table: NDArray[np.bool_], step: int, count: int) -> NDArray[np.bool_]:
    """Sums reachable with one more grid of ``count`` readings ``step`` units apart: x is
    reachable when some x - step * k, 0 <= k < count, was (a windowed OR along each residue
    of ``step``, by cumulative counts)."""
    size = table.size + step * (count - 1)
    rows = -(-size // step)
    padded = np.zeros(rows * step, dtype=np.int32)
    padded[: table.size] = table
    running = np.cumsum(padded.reshape(rows, step), axis=0, dtype=np.int32)
    window = running.copy()
    if count < rows:
        window[count:] -= running[:-count]
    reached: NDArray[np.bool_] = (window > 0).reshape(-1)[:size]
    return reached


def _first_reading(grid: _Grid, total_pL: int, rest: _Sums) -> int | None:
    """The smallest k, 0 <= k < grid.count, such that the rest's sums hold
    total_pL - (grid.first_pL + grid.step_pL * k), or None."""
    step, unit = grid.step_pL, rest.unit_pL
    # step * k + unit * v = D, with 0 <= v <= span (and table[v]).
    d = total_pL - grid.first_pL - rest.first_pL
    k_low = max(0, -(-(d - unit * rest.span) // step))
    k_high = min(grid.count - 1, d // step)
    common = math.gcd(step, unit)
    if k_low > k_high or d % common:
        return None
    # k = k0 (mod period) solves step * k = d (mod unit).
    period = unit // common
    k0 = (d // common) * pow(step // common, -1, period) % period if period > 1 else 0
    first = k_low + (k0 - k_low) % period
    if first > k_high:
        return None
    if rest.table is None:
        return first
    ks = np.arange(first, k_high + 1, period, dtype=np.int64)
    hits = np.flatnonzero(rest.table[(d - step * ks) // unit])
    return int(ks[hits[0]]) if hits.size else None


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

    Raises
    ------
    InvalidInputError
        Field ``option``: several graded deliveries whose sums have gaps and would need more
        than :data:`MAX_GRADED_SUMS` of them tabulated (see ``_graded_parts``).

    Notes
    -----
    Checked from the devices directly, not looked up in :func:`deliverable_volumes`, so that
    an independent verifier can use it. Several graded deliveries in one option are allowed,
    and decided without trying every combination of their readings.
    """
    if not option or not math.isfinite(volume_mL) or volume_mL <= 0.0:
        return False
    shelf = devices_by_id(glassware)
    if any(device_id not in shelf for device_id in option):
        return False
    return _split_pL(shelf, option, volume_mL * _PL_PER_ML) is not None


def shelf_device(devices: Mapping[str, Device], device_id: str, field: str) -> Device:
    """The device of a shelf with this id.

    Parameters
    ----------
    devices
        Device id -> device, e.g. from :func:`devices_by_id`.
    device_id
        The id a recipe or an option names.
    field
        The field to name in the error.

    Raises
    ------
    InvalidInputError
        The id is not on the shelf (the hint lists the shelf's ids).
    """
    if device_id not in devices:
        raise InvalidInputError(
            "device not on the shelf",
            field=field,
            value=device_id,
            hint=f"use one of {', '.join(sorted(devices))}",
        )
    return devices[device_id]


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
            value=(),
            hint="name the device ids, one per delivery",
        )
    for device_id in option:
        shelf_device(devices, device_id, "option")
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


# ---------------------------------------------------------------------------------------------
# Repeated deliveries: one addition as an ordered list of deliveries
# ---------------------------------------------------------------------------------------------

#: Most deliveries in one addition (common practice: each delivery adds its own error and a
#: chance to lose count at the bench; beyond five a larger device is the better tool).
MAX_DELIVERIES = 5

#: Most array elements :func:`volume_table` touches: its slots (one per multiple of the
#: table's step up to the largest volume wanted) times the passes over them (one per device
#: and round, and a few per graded device). 1e7 take about 0.1 s; a shelf whose own common
#: step would need more is tabulated on a coarser round step (see volume_table's Notes).
_MAX_WORK = 10_000_000
# Passes over the slots of one graded device's sliding-window minimum (padding, two running
# minima, their minimum, the key sum): an estimate for the work bound.
_WINDOW_PASSES = 5


@record
class Delivery:
    """One delivery of a device into a mixture.

    Attributes
    ----------
    device
        Device id (``Device.id``).
    volume_mL
        What this delivery gives [mL]: a one-mark device's nominal volume, or one reading of a
        graded device.
    """

    device: str
    volume_mL: float


@record
class Aliquots:
    """The preferred way to deliver one volume: an ordered list of deliveries.

    Attributes
    ----------
    volume_mL
        The deliveries' sum [mL], rounded as :attr:`DeliverableVolume.volume_mL`.
    deliveries
        In the order they are made: one-mark deliveries and graded devices at full scale,
        largest first, then at most one graded delivery of the remainder.
    u_mL
        Combined standard uncertainty [mL]: the deliveries' standard uncertainties in
        quadrature (independent deliveries, JCGM 100:2008 eq. 10).
    """

    volume_mL: float
    deliveries: tuple[Delivery, ...]
    u_mL: float

    @property
    def devices(self) -> tuple[str, ...]:
        """Device ids, one per delivery."""
        return tuple(d.device for d in self.deliveries)


@record
class _Item:
    """A delivery of one fixed volume: a one-mark device, or a graded one at full scale."""

    device: str
    volume_pL: int
    u2: float
    #: The delivery's share of the preference key: the delivery itself, its u^2 and, for a
    #: last-resort device, a surcharge larger than any number of other deliveries.
    cost: float = 0.0


class VolumeTable:
    """Every distinct volume a shelf delivers in up to ``max_deliveries`` deliveries.

    Built by :func:`volume_table`; the work is bounded by the number of distinct volumes, not
    by the number of combinations of deliveries (see its Notes).
    """

    __slots__ = (
        "_best",
        "_fixed_rounds",
        "_graded",
        "_items",
        "_volumes_pL",
        "operations",
        "quantum_pL",
    )

    def __init__(
        self,
        items: Sequence[_Item],
        graded: Sequence[tuple[str, _Grid, float, float]],
        fixed_rounds: Sequence[tuple[NDArray[np.int64], NDArray[np.float64]]],
        volumes_pL: NDArray[np.int64],
        best: NDArray[np.float64],
        quantum_pL: int,
        operations: int,
    ) -> None:
        self._items = tuple(items)
        self._graded = tuple(graded)
        self._fixed_rounds = tuple(fixed_rounds)
        self._volumes_pL = volumes_pL
        self._best = best
        self.quantum_pL = quantum_pL
        #: Array elements touched to build the table [unitless]: the bound the tests check.
        self.operations = operations

    def volumes_mL(self) -> NDArray[np.float64]:
        """Every deliverable volume, ascending [mL] (rounded to 1e-9 mL)."""
        return np.round(self._volumes_pL / _PL_PER_ML, 9)

    def __len__(self) -> int:
        return int(self._volumes_pL.size)

    def _index(self, volumes_mL: NDArray[np.float64]) -> NDArray[np.int64]:
        """Position of each volume in the table, or -1 when it is not deliverable."""
        targets = np.rint(np.asarray(volumes_mL, dtype=float) * _PL_PER_ML).astype(np.int64)
        if self._volumes_pL.size == 0:
            return np.full(targets.shape, -1, dtype=np.int64)
        position = np.searchsorted(self._volumes_pL, targets)
        position = np.minimum(position, max(self._volumes_pL.size - 1, 0))
        found = np.abs(self._volumes_pL[position] - targets) <= _MATCH_PL
        return np.where(found, position, -1).astype(np.int64)

    def contains(self, volumes_mL: NDArray[np.float64]) -> NDArray[np.bool_]:
        """Whether each volume [mL] is deliverable (within 1e-9 mL)."""
        result: NDArray[np.bool_] = self._index(volumes_mL) >= 0
        return result

    def best(self, volume_mL: float) -> Aliquots | None:
        """The preferred deliveries of one volume [mL], or None when it is not deliverable.

        No last-resort device (:data:`LAST_RESORT_KINDS`) where other devices can make the
        volume, then the fewest deliveries, then the smallest combined uncertainty; ties go to
        the larger one-mark volumes and the shelf order of graded devices.
        """
        index = int(self._index(np.array([volume_mL]))[0])
        if index < 0:
            return None
        target_pL = int(self._volumes_pL[index])
        key = float(self._best[index])
        last_vols, last_keys = self._fixed_rounds[-1]
        # Fixed deliveries only (one-mark devices, graded devices at full scale).
        position = int(np.searchsorted(last_vols, target_pL))
        if (
            position < last_vols.size
            and last_vols[position] == target_pL
            and last_keys[position] == key
        ):
            return self._aliquots(self._fixed_path(target_pL, len(self._fixed_rounds) - 1))
        state_vols, state_keys = self._fixed_rounds[-2]
        for device_id, grid, u2, cost in self._graded:
            low = target_pL - grid.last_pL
            high = target_pL - grid.first_pL
            start, stop = np.searchsorted(state_vols, [low, high + 1])
            states = state_vols[start:stop]
            keys = state_keys[start:stop] + cost
            hits = np.flatnonzero(((high - states) % grid.step_pL == 0) & (keys == key))
            if hits.size:
                state_pL = int(states[hits[0]])
                path = self._fixed_path(state_pL, len(self._fixed_rounds) - 2)
                remainder = _Item(device_id, target_pL - state_pL, u2, cost)
                return self._aliquots([*path, remainder])
        raise AssertionError("a tabulated volume has no way to deliver it")  # pragma: no cover

    def _fixed_path(self, volume_pL: int, round_index: int) -> list[_Item]:
        """The fixed deliveries behind a fixed-only state, largest first."""
        path: list[_Item] = []
        while volume_pL > 0:
            vols, keys = self._fixed_rounds[round_index]
            key = keys[int(np.searchsorted(vols, volume_pL))]
            # The earliest round with the same key has the fewest deliveries.
            while round_index > 0:
                prev_vols, prev_keys = self._fixed_rounds[round_index - 1]
                position = int(np.searchsorted(prev_vols, volume_pL))
                if (
                    position < prev_vols.size
                    and prev_vols[position] == volume_pL
                    and prev_keys[position] == key
                ):
                    round_index -= 1
                    continue
                break
            prev_vols, prev_keys = self._fixed_rounds[round_index - 1]
            for item in self._items:
                rest = volume_pL - item.volume_pL
                position = int(np.searchsorted(prev_vols, rest))
                if (
                    rest >= 0
                    and position < prev_vols.size
                    and prev_vols[position] == rest
                    and prev_keys[position] + item.cost == key
                ):
                    path.append(item)
                    volume_pL, round_index = rest, round_index - 1
                    break
            else:  # pragma: no cover
                raise AssertionError("a fixed state has no predecessor")
        return sorted(path, key=lambda item: (-item.volume_pL, item.device))

    def _aliquots(self, path: Sequence[_Item]) -> Aliquots:
        deliveries = tuple(
            Delivery(item.device, round(item.volume_pL / _PL_PER_ML, 9)) for item in path
        )
        total_pL = sum(item.volume_pL for item in path)
        return Aliquots(
            volume_mL=round(total_pL / _PL_PER_ML, 9),
            deliveries=deliveries,
            u_mL=math.sqrt(sum(item.u2 for item in path)),
        )


def _on_step(grid: _Grid, step_pL: int) -> _Grid:
    """The readings of a grid that are whole multiples of ``step_pL`` [pL], as a grid.

    first + k * step is a multiple of q exactly when k * step = -first (mod q); with
    g = gcd(step, q) that needs g | first, and then k runs through one residue class modulo
    q / g (the linear congruence theorem, from memory).
    """
    divisor = math.gcd(grid.step_pL, step_pL)
    if grid.first_pL % divisor:
        return _NO_GRID
    period = step_pL // divisor
    k = (-(grid.first_pL // divisor) * pow(grid.step_pL // divisor, -1, period)) % period
    if k >= grid.count:
        return _NO_GRID
    count = (grid.count - 1 - k) // period + 1
    return _Grid(grid.first_pL + k * grid.step_pL, grid.step_pL * period, count)


def backward_window_min(values: NDArray[np.float64], size: int) -> NDArray[np.float64]:
    """Minimum of each row and the ``size - 1`` rows before it (infinity before the first).

    The van Herk / Gil-Werman algorithm (van Herk, Pattern Recognit. Lett. 13 (1992) 517-521;
    Gil and Werman, IEEE Trans. PAMI 15 (1993) 504-507, from memory): running minima within
    blocks of ``size`` rows, forward and backward, give every window's minimum from two of
    them, so the work is linear in the rows whatever ``size`` is.

    Parameters
    ----------
    values
        Shape (n, m); windows run along axis 0.
    size
        Window length, >= 1.

    Returns
    -------
    NDArray[np.float64]
        Shape (n, m).
    """
    n, m = values.shape
    total = n + size - 1
    blocks = -(-total // size)
    padded = np.full((blocks * size, m), np.inf)
    padded[size - 1 : size - 1 + n] = values
    grouped = padded.reshape(blocks, size, m)
    prefix = np.minimum.accumulate(grouped, axis=1).reshape(-1, m)
    suffix = np.minimum.accumulate(grouped[:, ::-1], axis=1)[:, ::-1].reshape(-1, m)
    result: NDArray[np.float64] = np.minimum(suffix[:n], prefix[size - 1 : size - 1 + n])
    return result


def volume_table(
    glassware: Sequence[Device],
    *,
    max_volume_mL: float,
    max_deliveries: int = MAX_DELIVERIES,
) -> VolumeTable:
    """Tabulate every distinct volume the shelf delivers, with its preferred deliveries.

    Parameters
    ----------
    glassware
        The shelf (vessels are skipped).
    max_volume_mL
        Largest volume wanted [mL].
    max_deliveries
        Most deliveries in one addition [unitless]; default :data:`MAX_DELIVERIES`.

    Returns
    -------
    VolumeTable
        Its :meth:`VolumeTable.best` gives the deliveries of a volume.

    Raises
    ------
    InvalidInputError
        ``max_deliveries`` < 1, a non-finite bound, or a device the catalogue cannot use.
        Any shelf is tabulated: the work is bounded (see Notes), never refused.

    Notes
    -----
    A way to deliver a volume is any number of *fixed* deliveries (a one-mark device's
    nominal volume, or a graded device -- graduated pipette, buret, variable piston pipette,
    cylinder -- filled to full scale) plus at most one graded delivery of the remainder, each
    on the device's own grid and so at or above its ``min_delivery_mL``. A graded device
    therefore delivers n times full scale plus one remainder ("2 x 1000 µL, then 650 µL").

    The preferred way uses no last-resort device (a graduated cylinder,
    :data:`LAST_RESORT_KINDS`) where the others can make the volume, then the fewest
    deliveries, then the smallest combined
    standard uncertainty (independent deliveries add in quadrature; the catalogue's
    uncertainties do not depend on the volume delivered, so each way's uncertainty is fixed).
    Both are additive, so the best ways are found by dynamic programming over *distinct
    volumes*: round k keeps, for every volume reachable with at most k fixed deliveries, only
    its best key; the graded remainder is then a sliding-window minimum along the device's
    grid. The work is a few passes over the distinct volumes per device, whatever the number
    of combinations. The volumes live on a dense table of the shelf's common step (the
    greatest common divisor of every volume, grid start and step, in pL).

    When that table times the passes over it would exceed ``_MAX_WORK`` elements (a
    0.2-2 µL piston pipette set in 0.02 µL steps beside a 10 mL tube gives a million slots,
    times some forty passes for a full shelf), the table's step is coarsened to the shelf's
    common step times the smallest power of ten that fits, and every delivery is then a
    whole multiple of that step: one-mark volumes (and full scales) off it are left out, and
    each graded device keeps the readings on it. Every volume listed is still delivered
    exactly by the devices named; only volumes that would need a reading finer than the step
    are missing (for a 10 mL total, a step of at most 1 µL, far below the 0.01 mL the design
    thins its search to). The work, ``operations``, is then at most about ``_MAX_WORK``.
    """

    _check_max_deliveries(max_deliveries)
    if not math.isfinite(max_volume_mL):
        raise InvalidInputError(
            "volume bound must be finite",
            field="max_volume_mL",
            value=max_volume_mL,
            hint="give a number",
        )
    high_pL = max(_to_pL(max_volume_mL), 0)
    usable = [(device_id, grid, u2) for device_id, grid, u2 in _usable(glassware)]
    last_resort = _last_resort_ids(glassware)
    natural = 0
    for _, grid, _ in usable:
        natural = math.gcd(natural, grid.first_pL, grid.step_pL)
    # The step of the table: the shelf's own common step when the work fits, else the
    # finest round step (the common step times a power of ten) that keeps it within
    # _MAX_WORK, the deliveries then restricted to whole multiples of it.
    reaching = sum(1 for _, grid, _ in usable if grid.first_pL <= high_pL)
    per_slot = (max_deliveries + _WINDOW_PASSES) * reaching
    step_pL = natural
    power = 1
    while natural and (high_pL // step_pL + 1) * per_slot > _MAX_WORK:
        step_pL = math.lcm(natural, power)
        power *= 10
    # Each delivery adds `big` to its way's key, more than every u^2 of a way together, so
    # the fewest deliveries win; a last-resort device adds `surcharge`, more than every
    # other delivery of a way together, so it is used only where nothing else delivers.
    largest_u2 = max([u2 for _, _, u2 in usable] + [0.0])
    big = 1.0 + 2.0 * max_deliveries * largest_u2
    surcharge = (max_deliveries + 1) * (big + largest_u2)

    def cost(device_id: str, u2: float) -> float:
        return big + u2 + (surcharge if device_id in last_resort else 0.0)

    items: list[_Item] = []
    graded: list[tuple[str, _Grid, float, float]] = []
    for device_id, grid, u2 in usable:
        if grid.last_pL <= high_pL and grid.last_pL % max(step_pL, 1) == 0:
            items.append(_Item(device_id, grid.last_pL, u2, cost(device_id, u2)))
        if grid.count > 1:
            on_step = _on_step(grid, step_pL)
            if on_step.count > 0 and on_step.first_pL <= high_pL:
                graded.append((device_id, on_step, u2, cost(device_id, u2)))
    # Largest volume first: ties in the backtracking go to the larger deliveries.
    items.sort(key=lambda item: (-item.volume_pL, item.device))

    quantum = 0
    for item in items:
        quantum = math.gcd(quantum, item.volume_pL)
    for _, grid, _, _ in graded:
        quantum = math.gcd(quantum, grid.first_pL, grid.step_pL)
    slots = high_pL // quantum + 1 if quantum else 1
    operations = 0
    fixed_rounds: list[tuple[NDArray[np.int64], NDArray[np.float64]]] = []
    # Dense: one slot per multiple of the common step.
    current = np.full(slots, np.inf)
    current[0] = 0.0
    dense_rounds = [current]
    for _ in range(max_deliveries):
        following = current.copy()
        for item in items:
            shift = item.volume_pL // quantum
            np.minimum(
                following[shift:],
                current[: slots - shift] + item.cost,
                out=following[shift:],
            )
            operations += slots - shift
        dense_rounds.append(following)
        current = following
    for dense in dense_rounds:
        where = np.flatnonzero(np.isfinite(dense))
        fixed_rounds.append((where.astype(np.int64) * quantum, dense[where]))
    best = dense_rounds[-1].copy()
    states = dense_rounds[-2]
    for _, grid, _, grid_cost in graded:
        first, step = grid.first_pL // quantum, grid.step_pL // quantum
        if first >= slots:
            continue
        if grid.count == 1:
            np.minimum(best[first:], states[: slots - first] + grid_cost, out=best[first:])
            operations += slots - first
            continue
        # Backward window of grid.count states, one residue class of the step at a time.
        length = -(-(slots - first) // step) * step
        shifted = np.full(length, np.inf)
        shifted[: slots - first] = states[: slots - first]
        by_class = shifted.reshape(-1, step)
        size = min(grid.count, by_class.shape[0])
        window = backward_window_min(by_class, size)
        operations += length
        candidate = window.reshape(-1)[: slots - first] + grid_cost
        np.minimum(best[first:], candidate, out=best[first:])
    where = np.flatnonzero(np.isfinite(best[1:])) + 1
    volumes_pL = where.astype(np.int64) * quantum
    best_keys = best[where]
    return VolumeTable(
        items, graded, fixed_rounds, volumes_pL, best_keys, max(quantum, 1), operations
    )


def delivers(device: Device, volume_mL: float) -> bool:
    """Whether one delivery of the device can give this volume [mL] (within 1e-9 mL).

    One reading on the device's grid (:func:`single_volumes_mL`): a one-mark device's nominal
    volume; a graded device's reading at or above its ``min_delivery_mL``, at most its
    capacity; a piston pipette's setting inside its range. False for vessels.
    """
    if not math.isfinite(volume_mL) or volume_mL <= 0.0:
        return False
    grid = _grid(device)
    if grid.count == 0:
        return False
    target_pL = volume_mL * _PL_PER_ML
    return abs(grid.nearest_one_pL(target_pL) - target_pL) <= _MATCH_PL
