"""Tests of the glassware model (planner.lab.tolerances, .deliveries, .glassware).

Tolerance tables, grids and deliverable volumes.

Reference values name their source beside them. Values that could not be checked against the
standard's text are marked "from memory", as they are in the module.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.errors import InvalidInputError
from planner.inputs import Device
from planner.lab.deliveries import (
    MAX_COMBINATIONS,
    MAX_DELIVERIES,
    DeliverableVolume,
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
from planner.lab.glassware import stock_flasks
from planner.lab.tolerances import (
    ASTM_TOLERANCES_mL,
    ISO_8655_2_ERRORS_uL,
    ISO_TOLERANCES_mL,
    piston_errors_uL,
    standard_uncertainty_mL,
    table_tolerance_mL,
    tolerance_mL,
)


def pipette(volume_mL, device_class="A"):
    return Device(kind="transfer-pipette", volume_mL=volume_mL, device_class=device_class)


def piston(low_uL, high_uL, step_uL):
    return Device(
        kind="piston-pipette",
        volume_mL=high_uL / 1000,
        device_class="",
        range_uL=(low_uL, high_uL),
        step_uL=step_uL,
    )


BURET_25 = Device(kind="buret", volume_mL=25.0)
PISTON_1000 = piston(100.0, 1000.0, 1.0)
TARGET_SHELF = (BURET_25, PISTON_1000, *(pipette(v) for v in (1.0, 2.0, 5.0, 10.0)))


# --- tolerance tables against the standards ---------------------------------------------------


@pytest.mark.parametrize(
    ("kind", "device_class", "nominal_mL", "expected_mL"),
    [
        ("transfer-pipette", "A", 0.5, 0.005),  # ISO 648:2008 Table 1, A 0.5 mL (from memory)
        ("transfer-pipette", "A", 1.0, 0.008),  # ISO 648:2008 Table 1, A 1 mL (from memory)
        ("transfer-pipette", "B", 1.0, 0.015),  # ISO 648:2008 Table 1, B 1 mL (from memory)
        ("transfer-pipette", "A", 10.0, 0.020),  # ISO 648:2008 Table 1, A 10 mL (from memory)
        ("transfer-pipette", "A", 100.0, 0.080),  # ISO 648:2008 Table 1, A 100 mL (from memory)
        ("volumetric-flask", "A", 25.0, 0.04),  # ISO 1042:1998 Table 1, A 25 mL (from memory)
        ("volumetric-flask", "A", 100.0, 0.10),  # ISO 1042:1998 Table 1, A 100 mL (from memory)
        ("volumetric-flask", "B", 1000.0, 0.80),  # ISO 1042:1998 Table 1, B 1 L (from memory)
        ("buret", "A", 25.0, 0.03),  # ISO 385:2005 Table 1, A 25 mL (from memory)
        ("buret", "A", 50.0, 0.05),  # ISO 385:2005 Table 1, A 50 mL (from memory)
        ("buret", "B", 50.0, 0.10),  # ISO 385:2005 Table 1, B 50 mL (from memory)
        ("graduated-pipette", "A", 1.0, 0.006),  # ISO 835:2007, A 1 mL (from memory)
        ("graduated-pipette", "A", 10.0, 0.05),  # ISO 835:2007, A 10 mL (from memory)
        ("graduated-cylinder", "A", 100.0, 0.5),  # ISO 4788:2005 Table 1, A 100 mL (from memory)
        ("graduated-cylinder", "B", 100.0, 1.0),  # ISO 4788:2005 Table 1, B 100 mL (from memory)
    ],
)
def test_iso_table_rows(kind, device_class, nominal_mL, expected_mL):
    assert table_tolerance_mL(kind, device_class, nominal_mL) == pytest.approx(expected_mL)
    device = Device(kind=kind, volume_mL=nominal_mL, device_class=device_class)
    assert tolerance_mL(device) == pytest.approx(expected_mL)


@pytest.mark.parametrize(
    ("kind", "device_class", "nominal_mL", "expected_mL"),
    [
        # ASTM E969-02 (R2012) Table 1, checked against the standard's public preview:
        ("transfer-pipette", "A", 0.5, 0.006),  # class A 0.5 mL: ±0.006 mL
        ("transfer-pipette", "B", 0.5, 0.012),  # class B 0.5 mL: ±0.012 mL
        ("transfer-pipette", "A", 5.0, 0.01),  # class A 5 mL: ±0.01 mL
        ("transfer-pipette", "B", 6.0, 0.03),  # class B 6 mL: ±0.03 mL (not 2 x 0.01)
        ("transfer-pipette", "A", 10.0, 0.02),  # E969 Table 1, A 10 mL: ±0.02 (from memory)
        ("volumetric-flask", "A", 100.0, 0.08),  # ASTM E288 Table 1, A 100 mL (from memory)
        ("volumetric-flask", "B", 100.0, 0.16),  # ASTM E288 section 1.1.2: B = 2 x A (checked)
        ("buret", "A", 50.0, 0.05),  # ASTM E287 Table 1, A 50 mL (from memory)
        ("buret", "B", 25.0, 0.06),  # ASTM E287 section 1.1.2: B = 2 x A 0.03 (checked)
    ],
)
def test_astm_table_rows(kind, device_class, nominal_mL, expected_mL):
    assert table_tolerance_mL(kind, device_class, nominal_mL, standard="ASTM") == pytest.approx(
        expected_mL
    )


@pytest.mark.parametrize(
    ("nominal_uL", "systematic_uL", "random_uL"),
    [
        (2.0, 0.16, 0.08),  # ISO 8655-2:2002 Table 1, 2 µL: ±8.0 %, 4.0 % (from memory)
        (10.0, 0.12, 0.08),  # ISO 8655-2:2002 Table 1, 10 µL: ±1.2 %, 0.8 % (from memory)
        (100.0, 0.8, 0.3),  # ISO 8655-2:2002 Table 1, 100 µL: ±0.8 %, 0.3 % (from memory)
        (1000.0, 8.0, 3.0),  # ISO 8655-2:2002 Table 1, 1000 µL: ±0.8 %, 0.3 % (from memory)
        (10000.0, 60.0, 30.0),  # ISO 8655-2:2002 Table 1, 10 mL: ±0.6 %, 0.3 % (from memory)
    ],
)
def test_iso_8655_rows(nominal_uL, systematic_uL, random_uL):
    device = piston(nominal_uL / 10, nominal_uL, nominal_uL / 1000)
    assert piston_errors_uL(device, nominal_uL) == pytest.approx((systematic_uL, random_uL))
    assert tolerance_mL(device) == pytest.approx(systematic_uL / 1000)


def test_piston_setting_below_nominal_keeps_absolute_limit():
    # ISO 8655-2:2002: the µL limits at nominal apply to every selectable volume (from memory),
    # so a 100-1000 µL pipette set to 100 µL may still err by ±8 µL (= 8 % of the setting).
    assert piston_errors_uL(PISTON_1000, 100.0) == pytest.approx((8.0, 3.0))
    assert tolerance_mL(PISTON_1000, 0.1) == pytest.approx(0.008)


def test_graded_devices_use_full_capacity_tolerance_at_any_volume():
    # ISO 385:2005 (from memory) and ISO 4788:2005 clause 7 (checked): the limit holds at any
    # point of the scale, so a 3 mL delivery from a 25 mL buret keeps ±0.03 mL (ISO 385, A 25).
    assert tolerance_mL(BURET_25, 3.0) == pytest.approx(0.03)
    cylinder = Device(kind="graduated-cylinder", volume_mL=100.0)
    assert tolerance_mL(cylinder, 20.0) == pytest.approx(0.5)  # ISO 4788 A 100 mL (memory)


@pytest.mark.parametrize(
    ("table", "kind", "sizes_mL"),
    [
        # Class B within twice class A, stated in words: ASTM E288 and E287 section 1.1.2.
        (ASTM_TOLERANCES_mL, "volumetric-flask", None),
        (ASTM_TOLERANCES_mL, "buret", None),
        # ASTM E969 Table 1 rows 0.5 to 5 mL (checked): B = 2 x A.
        (ASTM_TOLERANCES_mL, "transfer-pipette", (0.5, 1.0, 2.0, 3.0, 4.0, 5.0)),
        # ISO 1042:1998: B = 2 x A for every size (from memory).
        (ISO_TOLERANCES_mL, "volumetric-flask", None),
        # ISO 648:2008: B = 2 x A except 1 mL (from memory).
        (ISO_TOLERANCES_mL, "transfer-pipette", (0.5, 2.0, 5.0, 10.0, 20.0, 25.0, 50.0, 100.0)),
    ],
)
def test_class_b_is_twice_class_a_where_the_standards_say_so(table, kind, sizes_mL):
    class_a = table[kind]["A"]
    class_b = table[kind]["B"]
    for size in sizes_mL or class_a:
        assert class_b[size] == pytest.approx(2 * class_a[size]), size


def test_class_b_is_not_always_twice_class_a():
    # ASTM E969-02 Table 1 (checked): 7 mL class A ±0.01, class B ±0.03.
    assert ASTM_TOLERANCES_mL["transfer-pipette"]["B"][7.0] == pytest.approx(0.03)
    # ISO 648:2008 Table 1 (from memory): 1 mL class A ±0.008, class B ±0.015.
    assert ISO_TOLERANCES_mL["transfer-pipette"]["B"][1.0] == pytest.approx(0.015)


@pytest.mark.parametrize(
    ("kind", "sizes_mL"),
    [
        # The common sizes the planner must know (task brief; DESIGN.md section 3 "Glassware").
        ("transfer-pipette", (0.5, 1, 2, 5, 10, 20, 25, 50, 100)),
        ("volumetric-flask", (5, 10, 25, 50, 100, 250, 500, 1000, 2000)),
        ("buret", (5, 10, 25, 50, 100)),
        ("graduated-pipette", (1, 2, 5, 10, 25)),
        ("graduated-cylinder", (5, 10, 25, 50, 100, 250, 500, 1000)),
    ],
)
def test_default_tables_cover_common_sizes(kind, sizes_mL):
    for device_class in ("A", "B"):
        for size in sizes_mL:
            assert table_tolerance_mL(kind, device_class, float(size)) > 0


def test_piston_table_covers_2_uL_to_10_mL():
    # ISO 8655-2:2002 Table 1 nominal volumes (from memory).
    assert set(ISO_8655_2_ERRORS_uL) >= {2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000}


def test_device_tolerance_overrides_the_table():
    # A certificate value on the device wins, even for a size no table holds.
    device = Device(kind="transfer-pipette", volume_mL=3.7, tolerance_mL=0.012)
    assert tolerance_mL(device) == 0.012
    assert standard_uncertainty_mL(device) == pytest.approx(0.012 / math.sqrt(6))


def test_standard_uncertainty_is_triangular():
    # EURACHEM/CITAC CG4 3rd ed. (2012), triangular distribution u = a / sqrt(6):
    # a = 0.020 mL (ISO 648 A 10 mL, from memory) -> 0.020 / 2.449490 = 0.0081650 mL.
    assert standard_uncertainty_mL(pipette(10.0)) == pytest.approx(0.0081650, rel=1e-4)
    # a = 0.03 mL (ISO 385 A 25 mL, from memory) -> 0.0122474 mL.
    assert standard_uncertainty_mL(BURET_25, 12.0) == pytest.approx(0.0122474, rel=1e-4)


# --- errors name the field ------------------------------------------------------------------


def test_unknown_size_names_field_value_and_sizes():
    with pytest.raises(InvalidInputError, match="volume_mL") as info:
        tolerance_mL(pipette(3.7))
    message = str(info.value)
    assert "3.7" in message
    assert "0.5, 1, 2, 5, 10, 20, 25, 50, 100 mL" in message  # the ISO 648 sizes held
    assert info.value.field == "volume_mL"


def test_astm_buret_without_5_mL_row():
    # ASTM E287-02 section 4.1 covers 10, 25, 50 and 100 mL burets (checked).
    with pytest.raises(InvalidInputError, match=r"volume_mL.*10, 25, 50, 100 mL"):
        table_tolerance_mL("buret", "A", 5.0, standard="ASTM")


def test_unknown_class_names_field():
    with pytest.raises(InvalidInputError, match="device_class"):
        tolerance_mL(Device(kind="buret", volume_mL=25.0, device_class="C"))


def test_unknown_kind_names_field():
    with pytest.raises(InvalidInputError, match="kind"):
        single_volumes_mL(Device(kind="beaker", volume_mL=100.0))


def test_tube_has_no_tolerance():
    with pytest.raises(InvalidInputError, match=r"kind.*tube"):
        tolerance_mL(Device(kind="tube", volume_mL=15.0))


def test_piston_size_outside_iso_8655_table():
    with pytest.raises(InvalidInputError, match=r"volume_mL.*µL"):
        tolerance_mL(piston(0.5, 2.5, 0.01))


def test_volume_outside_device_range_names_field():
    with pytest.raises(InvalidInputError, match="volume_mL"):
        tolerance_mL(BURET_25, 30.0)
    with pytest.raises(InvalidInputError, match="volume_mL"):
        tolerance_mL(pipette(5.0), 4.0)
    with pytest.raises(InvalidInputError, match="volume_mL"):
        piston_errors_uL(PISTON_1000, 50.0)


def test_piston_without_step_names_field():
    device = Device(kind="piston-pipette", volume_mL=1.0, range_uL=(100.0, 1000.0))
    with pytest.raises(InvalidInputError, match="step_uL"):
        single_volumes_mL(device)


def test_conflicting_ids_name_field():
    with pytest.raises(InvalidInputError, match=r"glassware.*transfer-pipette-10mL"):
        devices_by_id([pipette(10.0, "A"), pipette(10.0, "B")])
    # Identical entries collapse.
    assert list(devices_by_id([pipette(10.0), pipette(10.0)])) == ["transfer-pipette-10mL"]


def test_max_deliveries_must_be_positive():
    with pytest.raises(InvalidInputError, match="max_deliveries"):
        deliverable_volumes(TARGET_SHELF, max_volume_mL=10.0, max_deliveries=0)


# --- device ids -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("device", "expected_id"),
    [
        # DESIGN.md section 5, contract detail 5.
        (pipette(5.0), "transfer-pipette-5mL"),
        (Device(kind="graduated-pipette", volume_mL=10.0), "graduated-pipette-10mL"),
        (BURET_25, "buret-25mL"),
        (PISTON_1000, "piston-pipette-100-1000uL"),
        (Device(kind="volumetric-flask", volume_mL=25.0), "volumetric-flask-25mL"),
        (Device(kind="graduated-cylinder", volume_mL=50.0), "graduated-cylinder-50mL"),
    ],
)
def test_device_ids(device, expected_id):
    assert device.id == expected_id
    assert list(devices_by_id([device])) == [expected_id]


# --- single-delivery grids --------------------------------------------------------------------


def test_transfer_pipette_delivers_its_nominal_volume():
    assert single_volumes_mL(pipette(5.0)).tolist() == [5.0]


def test_buret_grid():
    # DESIGN.md contract detail 5: a buret reads to 0.01 mL; it delivers 1.00 mL at least
    # (common practice, issue 11), up to capacity: (25.00 - 1.00) / 0.01 + 1 = 2401 readings.
    values = single_volumes_mL(BURET_25)
    assert values.size == 2401
    assert values[0] == 1.0
    assert values[-1] == 25.0
    assert np.array_equal(values, np.arange(100, 2501) / 100)
    # Integer grid: the 31st reading is exactly the float 1.3, not 1.3000000000000003.
    assert values[30] == 1.3
    assert np.array_equal(values, np.round(values, 9))


def test_buret_with_own_division_and_minimum():
    device = Device(kind="buret", volume_mL=10.0, division_mL=0.05, min_delivery_mL=1.0)
    values = single_volumes_mL(device)
    # 1.00, 1.05, ..., 10.00: (10 - 1) / 0.05 + 1 = 181 readings.
    assert values.size == 181
    assert values[[0, 1, -1]].tolist() == [1.0, 1.05, 10.0]
    # A minimum between two marks starts at the next mark: 0.105 mL -> 0.11 mL.
    device = Device(kind="buret", volume_mL=10.0, min_delivery_mL=0.105)
    assert single_volumes_mL(device)[0] == 0.11


def test_piston_pipette_grid():
    # range_uL 100..1000 in step_uL 1 (DESIGN.md contract detail 5): 901 settings, in mL.
    values = single_volumes_mL(PISTON_1000)
    assert values.size == 901
    assert values[[0, 1, -1]].tolist() == [0.1, 0.101, 1.0]


def test_graduated_pipette_grids():
    # DESIGN.md contract detail 5: division 0.01 mL up to 2 mL capacity, else 0.1 mL; from
    # 10 % of capacity (common practice) -> 0.10..1.00 and 1.0..10.0, 91 readings each.
    small = single_volumes_mL(Device(kind="graduated-pipette", volume_mL=1.0))
    large = single_volumes_mL(Device(kind="graduated-pipette", volume_mL=10.0))
    assert small.size == 91
    assert small[[0, 1, -1]].tolist() == [0.1, 0.11, 1.0]
    assert large.size == 91
    assert large[[0, 1, -1]].tolist() == [1.0, 1.1, 10.0]


def test_graduated_cylinder_grid():
    # ISO 4788:2005 Table 1 division of a 100 mL cylinder: 1 mL (from memory); from 10 % of
    # capacity (common practice): 10, 11, ..., 100 mL.
    values = single_volumes_mL(Device(kind="graduated-cylinder", volume_mL=100.0))
    assert values.size == 91
    assert values[[0, 1, -1]].tolist() == [10.0, 11.0, 100.0]


def test_vessels_deliver_nothing():
    assert single_volumes_mL(Device(kind="volumetric-flask", volume_mL=25.0)).size == 0
    assert single_volumes_mL(Device(kind="tube", volume_mL=15.0)).size == 0


# --- deliverable volumes ----------------------------------------------------------------------


def by_volume(volumes):
    return {entry.volume_mL: entry for entry in volumes}


def test_seven_mL_is_five_plus_two():
    shelf = [pipette(v) for v in (1.0, 2.0, 5.0, 10.0)]
    table = by_volume(deliverable_volumes(shelf, max_volume_mL=20.0))
    # DESIGN.md section 3: 7 mL = 5 + 2 from transfer pipettes; 5 + 1 + 1 needs one more.
    assert table[7.0].options == (
        ("transfer-pipette-5mL", "transfer-pipette-2mL"),
        ("transfer-pipette-5mL", "transfer-pipette-1mL", "transfer-pipette-1mL"),
    )
    assert table[7.0].best == ("transfer-pipette-5mL", "transfer-pipette-2mL")
    # 7.5 mL cannot be made from whole pipettes.
    assert 7.5 not in table


def test_four_mL_repeats_the_id():
    # DESIGN.md section 5: a repeated delivery repeats the id (4 mL = 2 + 2).
    shelf = [pipette(2.0), pipette(5.0)]
    table = by_volume(deliverable_volumes(shelf, max_volume_mL=10.0))
    assert table[4.0].options == (("transfer-pipette-2mL", "transfer-pipette-2mL"),)
    shelf = [pipette(1.0), pipette(2.0)]
    table = by_volume(deliverable_volumes(shelf, max_volume_mL=10.0))
    assert table[4.0].options == (
        ("transfer-pipette-2mL", "transfer-pipette-2mL"),
        ("transfer-pipette-2mL", "transfer-pipette-1mL", "transfer-pipette-1mL"),
    )


def test_fewest_deliveries_first_then_smallest_uncertainty():
    shelf = [BURET_25, Device(kind="graduated-pipette", volume_mL=10.0), pipette(5.0)]
    table = by_volume(deliverable_volumes(shelf, max_volume_mL=25.0, max_deliveries=2))
    # Among single deliveries the smaller tolerance comes first: ISO 648 A 5 mL ±0.015 <
    # ISO 385 A 25 mL ±0.03 < ISO 835 A 10 mL ±0.05 (all from memory).
    assert table[5.0].options == (
        ("transfer-pipette-5mL",),
        ("buret-25mL",),
        ("graduated-pipette-10mL",),
    )
    # One delivery beats two; 5 mL + 1 mL from the buret (±0.015, ±0.03) beats 5 mL + 1 mL
    # from the graduated pipette (±0.015, ±0.05).
    assert table[6.0].options == (
        ("buret-25mL",),
        ("graduated-pipette-10mL",),
        ("transfer-pipette-5mL", "buret-25mL"),
        ("transfer-pipette-5mL", "graduated-pipette-10mL"),
    )


def test_single_delivery_volumes_all_appear():
    table = by_volume(deliverable_volumes(TARGET_SHELF, max_volume_mL=25.0))
    for device in TARGET_SHELF:
        for volume in single_volumes_mL(device).tolist():
            assert (device.id,) in table[volume].options, (device.id, volume)


def test_min_and_max_volume_bounds():
    volumes = deliverable_volumes(TARGET_SHELF, max_volume_mL=2.0, min_volume_mL=1.5)
    values = [entry.volume_mL for entry in volumes]
    assert values[0] == 1.5
    assert values[-1] == 2.0
    assert values == sorted(set(values))


def test_vessel_only_shelf_delivers_nothing():
    shelf = [Device(kind="volumetric-flask", volume_mL=25.0), Device(kind="tube", volume_mL=15.0)]
    assert deliverable_volumes(shelf, max_volume_mL=25.0) == ()


def test_target_shelf_is_fast():
    # Task target: a 25 mL buret, a 100-1000 µL piston pipette (step 1 µL) and 1/2/5/10 mL
    # transfer pipettes enumerate in well under 0.2 s; best of three to ride out machine load.
    timings = []
    for _ in range(3):
        start = time.perf_counter()
        volumes = deliverable_volumes(TARGET_SHELF, max_volume_mL=25.0)
        timings.append(time.perf_counter() - start)
    assert min(timings) < 0.2
    assert len(volumes) > 2491


def test_best_property_is_first_option():
    entry = DeliverableVolume(volume_mL=4.0, options=(("a",), ("b", "c")))
    assert entry.best == ("a",)


# --- uncertainty of a combination -------------------------------------------------------------


def test_combination_uncertainty_five_plus_two():
    shelf = devices_by_id([pipette(5.0), pipette(2.0)])
    # ISO 648 A (from memory): 5 mL ±0.015, 2 mL ±0.010; CG4 u = a / sqrt(6); independent
    # deliveries add in quadrature: sqrt(0.015^2 + 0.010^2) / sqrt(6) = 0.0073598 mL.
    u = combination_uncertainty_mL(shelf, ("transfer-pipette-5mL", "transfer-pipette-2mL"), 7.0)
    assert u == pytest.approx(0.0073598, rel=1e-4)


def test_combination_uncertainty_with_graded_device():
    shelf = devices_by_id([pipette(5.0), BURET_25])
    # 5 mL pipette ±0.015 plus 2.37 mL from the buret ±0.03 (ISO 648, ISO 385 A; from memory):
    # sqrt(0.015^2 + 0.03^2) / sqrt(6) = 0.0136931 mL.
    u = combination_uncertainty_mL(shelf, ("transfer-pipette-5mL", "buret-25mL"), 7.37)
    assert u == pytest.approx(0.0136931, rel=1e-4)


def test_combination_uncertainty_errors_name_field():
    shelf = devices_by_id([pipette(5.0), pipette(2.0)])
    with pytest.raises(InvalidInputError, match="volume_mL"):
        combination_uncertainty_mL(shelf, ("transfer-pipette-5mL",), 7.0)
    with pytest.raises(InvalidInputError, match=r"option.*buret-25mL"):
        combination_uncertainty_mL(shelf, ("buret-25mL",), 7.0)
    with pytest.raises(InvalidInputError, match=r"option: an option needs at least one"):
        combination_uncertainty_mL(shelf, (), 7.0)
    with pytest.raises(InvalidInputError, match=r"use one of transfer-pipette-2mL, transfer-pipe"):
        combination_uncertainty_mL(shelf, ("transfer-pipette-5mL", "buret-25mL"), 7.0)


def test_stock_flasks_smallest_that_holds_else_several_of_the_largest():
    # ISO 1042 sizes 100, 250, 500, 1000, 2000 mL (from memory): 180 mL fits a 250 mL flask,
    # 100 mL exactly a 100 mL one; 4500 mL needs ceil(4500 / 2000) = 3 of the 2000 mL flask.
    assert stock_flasks(180.0) == (250.0, 1)
    assert stock_flasks(100.0) == (100.0, 1)
    assert stock_flasks(4500.0) == (2000.0, 3)


# --- is_deliverable ---------------------------------------------------------------------------


def test_is_deliverable_accepts_and_rejects():
    shelf = [*TARGET_SHELF, Device(kind="volumetric-flask", volume_mL=25.0)]
    five_two = ("transfer-pipette-5mL", "transfer-pipette-2mL")
    assert is_deliverable(shelf, 7.0, five_two)
    assert is_deliverable(shelf, 7.0 + 5e-10, five_two)  # within 1e-9 mL
    assert not is_deliverable(shelf, 7.005, five_two)
    assert is_deliverable(shelf, 12.34, ("buret-25mL",))
    assert not is_deliverable(shelf, 12.345, ("buret-25mL",))  # between 0.01 mL readings
    assert not is_deliverable(shelf, 0.05, ("buret-25mL",))  # below the 0.10 mL minimum
    assert not is_deliverable(shelf, 25.01, ("buret-25mL",))  # above capacity
    assert is_deliverable(shelf, 0.7 + 0.6, ("buret-25mL",))  # float drift does not matter
    assert not is_deliverable(shelf, 0.0995, ("piston-pipette-100-1000uL",))
    assert is_deliverable(shelf, 40.0, ("buret-25mL", "buret-25mL"))  # two graded deliveries
    assert not is_deliverable(shelf, 7.0, ("transfer-pipette-7mL",))  # not on the shelf
    assert not is_deliverable(shelf, 25.0, ("volumetric-flask-25mL",))  # a vessel
    assert not is_deliverable(shelf, 7.0, ())


def test_volume_no_device_can_make():
    # 1, 2, 5, 10 mL pipettes, a 25 mL buret (0.01 mL readings) and a 1 µL-step piston
    # pipette: 0.0005 mL is below every minimum and off every grid.
    for option in (
        ("buret-25mL",),
        ("piston-pipette-100-1000uL",),
        ("transfer-pipette-1mL",),
    ):
        assert not is_deliverable(TARGET_SHELF, 0.0005, option)
    table = by_volume(deliverable_volumes(TARGET_SHELF, max_volume_mL=1.0))
    assert 0.0005 not in table


# --- property: is_deliverable agrees with deliverable_volumes -------------------------------

TRANSFER_SIZES_mL = (0.5, 1.0, 2.0, 5.0, 10.0)


@st.composite
def shelves(draw):
    """Shelves in physical ranges: some transfer pipettes plus up to three graded devices."""
    sizes = draw(st.lists(st.sampled_from(TRANSFER_SIZES_mL), unique=True, max_size=4))
    shelf = [pipette(size) for size in sizes]
    if draw(st.booleans()):
        shelf.append(Device(kind="buret", volume_mL=draw(st.sampled_from((5.0, 10.0)))))
    if draw(st.booleans()):
        low, high, step = draw(st.sampled_from(((20.0, 200.0, 0.2), (100.0, 1000.0, 5.0))))
        shelf.append(piston(low, high, step))
    if draw(st.booleans()):
        shelf.append(Device(kind="graduated-pipette", volume_mL=draw(st.sampled_from((1.0, 2.0)))))
    if not shelf:
        shelf.append(pipette(1.0))
    return shelf


@settings(max_examples=40, deadline=None)
@given(
    shelf=shelves(),
    max_volume_mL=st.floats(min_value=0.5, max_value=12.0),
    max_deliveries=st.integers(min_value=1, max_value=3),
    data=st.data(),
)
def test_is_deliverable_agrees_with_enumeration(shelf, max_volume_mL, max_deliveries, data):
    volumes = deliverable_volumes(shelf, max_volume_mL=max_volume_mL, max_deliveries=max_deliveries)
    devices = devices_by_id(shelf)
    values = [entry.volume_mL for entry in volumes]
    assert values == sorted(set(values))
    assert all(0 < value <= max_volume_mL + 1e-9 for value in values)

    # Every listed option really delivers its volume, and options are ranked as promised.
    stride = max(1, len(volumes) // 60)
    for entry in volumes[::stride]:
        keys = []
        for option in entry.options:
            assert 1 <= len(option) <= max_deliveries
            assert is_deliverable(shelf, entry.volume_mL, option)
            u = combination_uncertainty_mL(devices, option, entry.volume_mL)
            keys.append((len(option), round(u, 12)))
        assert keys == sorted(keys)

    # A random option of the enumerated shape (fixed deliveries plus at most one graded one)
    # that is_deliverable accepts appears among the enumerated options for its volume.
    fixed = [d for d in devices.values() if single_volumes_mL(d).size == 1]
    graded = [d for d in devices.values() if single_volumes_mL(d).size > 1]
    n_graded = data.draw(st.integers(0, min(1, len(graded), max_deliveries)))
    n_fixed = data.draw(st.integers(0 if n_graded else 1, max_deliveries - n_graded))
    if n_fixed and not fixed:
        return
    chosen = [data.draw(st.sampled_from(fixed)) for _ in range(n_fixed)]
    volume_mL = sum(d.volume_mL for d in chosen)
    if n_graded:
        device = data.draw(st.sampled_from(graded))
        chosen.append(device)
        volume_mL += data.draw(st.sampled_from(single_volumes_mL(device).tolist()))
    option = tuple(d.id for d in chosen)
    assert is_deliverable(shelf, volume_mL, option)
    if volume_mL <= max_volume_mL:
        table = by_volume(volumes)
        entry = table[round(volume_mL, 9)]
        assert sorted(option) in [sorted(found) for found in entry.options]
    # Half a reading off the grid is never deliverable with the same option.
    nudge_mL = 0.5 * (1e-4 if n_graded else 1e-3)
    assert not is_deliverable(shelf, volume_mL + nudge_mL, option)


# --- limits found by fuzzing (tests/test_fuzz.py) --------------------------------------------


def test_reading_count_matches_the_listed_volumes():
    for device in (*TARGET_SHELF, Device(kind="tube", volume_mL=10.0)):
        assert reading_count(device) == len(single_volumes_mL(device))
    # 25 mL buret read to 0.01 mL from 1.00 mL: 2401 readings (1.00, 1.01, ..., 25.00).
    assert reading_count(BURET_25) == 2401
    # Cheap for any division: 1e-9 mL would need 25e9 readings (hundreds of GB to list).
    fine = Device(kind="buret", volume_mL=25.0, division_mL=1e-9)
    assert reading_count(fine) == 24_000_000_001


def test_combination_count_bounds_deliverable_volumes():
    count = combination_count(TARGET_SHELF, max_volume_mL=10.0)
    listed = deliverable_volumes(TARGET_SHELF, max_volume_mL=10.0)
    options = sum(len(entry.options) for entry in listed)
    # Every listed option is one counted pair; pairs beyond 10 mL are counted, not listed.
    assert options <= count
    assert count < MAX_COMBINATIONS


def test_too_many_combinations_are_refused_before_listing():
    # Twenty pipettes and eight finely read graduated pipettes: about 2e7 pairs up to 12 mL,
    # which took seconds and gigabytes before the guard.
    shelf = [
        Device(kind="transfer-pipette", volume_mL=0.103 + 0.1 * i, tolerance_mL=0.001)
        for i in range(20)
    ] + [
        Device(
            kind="graduated-pipette",
            volume_mL=5 + 0.25 * i,
            tolerance_mL=0.02,
            division_mL=0.0005,
        )
        for i in range(8)
    ]
    assert combination_count(shelf, max_volume_mL=12.0) > MAX_COMBINATIONS
    started = time.perf_counter()
    with pytest.raises(InvalidInputError, match="ways to deliver") as info:
        deliverable_volumes(shelf, max_volume_mL=12.0)
    assert info.value.field == "glassware"
    assert time.perf_counter() - started < 1.0


# --- repeated deliveries (issue 11) -----------------------------------------------------------


def _split(table, volume_mL):
    found = table.best(volume_mL)
    return None if found is None else [(d.device, d.volume_mL) for d in found.deliveries]


def test_a_volume_is_split_into_the_fewest_deliveries():
    table = volume_table([PISTON_1000], max_volume_mL=6.0)
    pp = PISTON_1000.id
    # Worked by hand: 2.65 mL from a 100-1000 µL pipette needs ceil(2.65 / 1.00) = 3
    # deliveries: 2 x 1000 µL, then the 650 µL remainder.
    assert _split(table, 2.65) == [(pp, 1.0), (pp, 1.0), (pp, 0.65)]
    assert _split(table, 0.65) == [(pp, 0.65)]
    assert _split(table, 5.0) == [(pp, 1.0)] * 5
    # 2.05 mL would leave a 50 µL remainder, below the pipette's 100 µL range.
    assert _split(table, 2.05) is None
    # 5.1 mL needs six deliveries, beyond the cap of five (common practice).
    assert MAX_DELIVERIES == 5
    assert _split(table, 5.1) is None


def test_one_mark_pipettes_come_first_then_the_remainder():
    shelf = [pipette(5.0), pipette(2.0), PISTON_1000]
    table = volume_table(shelf, max_volume_mL=10.0)
    # 7.65 mL = 5 mL + 2 mL + 650 µL (three deliveries); 5 mL + 2 x 1000 µL + 650 µL is four.
    found = table.best(7.65)
    assert [(d.device, d.volume_mL) for d in found.deliveries] == [
        ("transfer-pipette-5mL", 5.0),
        ("transfer-pipette-2mL", 2.0),
        (PISTON_1000.id, 0.65),
    ]
    # ISO 648 A 5 mL ±0.015 and 2 mL ±0.010 mL, ISO 8655-2 1000 µL systematic ±8 µL (all from
    # memory), u = a / sqrt(6), independent deliveries in quadrature:
    # sqrt(0.015^2 + 0.010^2 + 0.008^2) / sqrt(6) = 0.0080519 mL.
    assert found.u_mL == pytest.approx(0.0080519, rel=1e-4)


def test_least_delivery_rules_hold_for_every_tabulated_volume():
    graduated = Device(kind="graduated-pipette", volume_mL=10.0)
    table = volume_table([BURET_25, graduated, PISTON_1000], max_volume_mL=25.0)
    volumes = table.volumes_mL()
    assert volumes.size > 1000
    for volume_mL in volumes[::7].tolist():
        for d in table.best(volume_mL).deliveries:
            if d.device == BURET_25.id:
                assert d.volume_mL >= 1.0  # 1.00 mL per buret delivery (common practice)
            elif d.device == graduated.id:
                assert d.volume_mL >= 1.0  # 10 % of 10 mL (common practice)
            else:
                assert 0.1 <= d.volume_mL <= 1.0  # inside the 100-1000 µL range


def test_one_delivery_obeys_each_device_rule():
    graduated = Device(kind="graduated-pipette", volume_mL=10.0)
    assert not delivers(BURET_25, 0.99)
    assert delivers(BURET_25, 1.0)
    assert not delivers(graduated, 0.9)
    assert delivers(graduated, 1.0)
    assert not delivers(PISTON_1000, 0.099)
    assert delivers(PISTON_1000, 0.1)
    assert not delivers(PISTON_1000, 1.001)
    assert not delivers(pipette(5.0), 2.5)
    assert delivers(pipette(5.0), 5.0)


def test_own_min_delivery_raises_the_least_delivery():
    buret = Device(kind="buret", volume_mL=25.0, min_delivery_mL=2.0)
    table = volume_table([buret], max_volume_mL=25.0)
    assert table.volumes_mL()[0] == 2.0
    assert not delivers(buret, 1.5)


@pytest.mark.parametrize(
    ("rows", "columns", "size"), [(1, 1, 1), (7, 3, 1), (50, 4, 7), (64, 2, 8), (9, 5, 20)]
)
def test_backward_window_min_is_scipys_minimum_filter(rows, columns, size):
    # Reference: scipy.ndimage.minimum_filter1d with constant infinite padding and the origin
    # moved so that each window ends at its own row.
    from scipy.ndimage import minimum_filter1d

    from planner.lab.deliveries import backward_window_min

    values = np.random.default_rng(rows * 31 + size).random((rows, columns))
    expected = minimum_filter1d(
        values, size, axis=0, mode="constant", cval=np.inf, origin=(size - 1) // 2
    )
    assert np.array_equal(backward_window_min(values, size), expected)


# --- a shelf finer than the table's work bound (big-shelf benchmark) --------------------------


def test_a_too_fine_shelf_is_tabulated_on_a_coarser_round_step():
    # Invented shelf: a 0.2-2 µL piston pipette set in 0.002 µL steps beside the target shelf.
    # Its common step, 0.002 µL (2000 pL), would need 5e6 slots up to 10 mL; the table keeps
    # its work within 1e7 array elements (_MAX_WORK) on the common step times a power of ten.
    fine = piston(0.2, 2.0, 0.002)
    shelf = (*TARGET_SHELF, fine)
    table = volume_table(shelf, max_volume_mL=10.0)
    assert table.operations <= 10_000_000
    # Worked by hand: 7 delivering devices, 5 rounds plus 5 window passes each, is 70 passes
    # per slot, so at most 142 857 slots: 1e10 pL / 0.1 µL (1e5 pL) = 1e5 slots fit, 0.01 µL
    # (1e6 slots) does not.
    assert table.quantum_pL == 100_000
    # 1.5 µL lies on the 0.1 µL step: one delivery of the fine pipette.
    assert _split(table, 0.0015) == [(fine.id, 0.0015)]
    # 1.502 µL is a setting of the pipette but not on the step: left out of the table.
    assert delivers(fine, 0.001502)
    assert _split(table, 0.001502) is None
    # Every tabulated volume is still delivered exactly by the deliveries the table names,
    # each checked on its own device's grid (delivers), independently of the table.
    by_id = {device.id: device for device in shelf}
    volumes = table.volumes_mL()
    for volume_mL in volumes[:: max(1, volumes.size // 400)].tolist():
        deliveries = table.best(volume_mL).deliveries
        assert all(delivers(by_id[d.device], d.volume_mL) for d in deliveries)
        assert sum(d.volume_mL for d in deliveries) == pytest.approx(volume_mL, abs=1e-9)


# --- several graded deliveries: bounded search ------------------------------------------------

#: A piston pipette set in 0.01 µL steps from 10 to 1000 µL: 99 001 settings per delivery.
FINE_PISTON = Device(
    kind="piston-pipette", volume_mL=1.0, device_class="", range_uL=(10.0, 1000.0), step_uL=0.01
)


def test_several_finely_stepped_deliveries_are_decided_at_once():
    # Five deliveries of one pipette read 0.010 to 1.000 mL each on a 0.00001 mL grid, so
    # together they give every multiple of 0.00001 mL from 0.05 to 5 mL and nothing else
    # (arithmetic). The search that tried every combination of readings took 280 s of CPU
    # for three such deliveries of an off-grid volume (99 001 readings of the first, each
    # with a vector over the second and third; measured on the old code, a shared and loaded
    # machine), and five were out of reach; now each answer is a handful of integer steps.
    option = (FINE_PISTON.id,) * 5
    shelf = [FINE_PISTON]
    assert is_deliverable(shelf, 2.50001, option)
    assert is_deliverable(shelf, 0.05, option)
    assert is_deliverable(shelf, 5.0, option)
    assert not is_deliverable(shelf, 2.500005, option)  # half a step off the grid
    assert not is_deliverable(shelf, 0.04999, option)  # below 5 x 0.010 mL
    assert not is_deliverable(shelf, 5.00001, option)  # above 5 x 1.000 mL
    assert not is_deliverable(shelf, 1.500005, option[:3])
    # The split found is a real one: the uncertainty of five deliveries at one setting each.
    each_u = combination_uncertainty_mL(devices_by_id(shelf), option[:1], 0.5)
    assert combination_uncertainty_mL(devices_by_id(shelf), option, 2.5) == pytest.approx(
        math.sqrt(5) * each_u
    )


def _sums_by_enumeration(shelf, option):
    """Every total of one reading per delivery, in units of 1e-9 mL, by brute force."""
    devices = devices_by_id(shelf)
    grids = [np.round(single_volumes_mL(devices[d]) * 1e9).astype(np.int64) for d in option]
    totals = {0}
    for grid in grids:
        totals = {t + int(v) for t in totals for v in grid}
    return totals


def test_graded_deliveries_with_gaps_agree_with_enumeration():
    # Graded devices whose readings do not line up (0.3 mL and 0.7 mL divisions, 0.05 mL
    # piston steps): the sums have gaps, so they are tabulated; every volume on a 0.01 mL
    # grid over the whole range is checked against the totals enumerated by brute force.
    shelf = [
        Device(kind="graduated-pipette", volume_mL=2.0, division_mL=0.3),
        Device(kind="buret", volume_mL=5.0, division_mL=0.7),
        Device(kind="piston-pipette", volume_mL=0.5, device_class="", range_uL=(100.0, 500.0),
               step_uL=50.0),
    ]  # fmt: skip
    option = tuple(d.id for d in shelf)
    expected = _sums_by_enumeration(shelf, option)
    checked = 0
    for hundredth in range(1, 800):
        volume_mL = hundredth / 100
        assert is_deliverable(shelf, volume_mL, option) == (round(volume_mL * 1e9) in expected)
        checked += 1
    assert checked == 799
    assert len(expected) > 10


def test_graded_sums_too_many_to_tabulate_are_refused_with_the_field():
    # Steps of 0.001 and 0.0015 µL have no common grid finer than 0.0005 µL, and the second
    # and third deliveries then span over 1.6e7 such units: more than the planner tabulates.
    fine = Device(
        kind="piston-pipette", volume_mL=5.0, device_class="", range_uL=(10.0, 5000.0),
        step_uL=0.001,
    )  # fmt: skip
    odd = Device(
        kind="piston-pipette", volume_mL=5.0, device_class="", range_uL=(20.0, 5000.0),
        step_uL=0.0015,
    )  # fmt: skip
    with pytest.raises(InvalidInputError, match="option") as raised:
        is_deliverable([fine, odd], 3.0, (fine.id, fine.id, odd.id))
    assert "fewer graded devices" in str(raised.value)


def test_a_graduated_cylinder_delivers_only_what_nothing_else_can():
    # The school shelf: class B transfer pipettes of 1, 2 and 5 mL and a 10 mL graduated
    # cylinder. 3 mL of a limiting reagent from the cylinder (one delivery, ISO 4788 B 10 mL
    # ±0.2 mL, from memory) would carry about 4 % of standard uncertainty; from the 2 mL and
    # 1 mL pipettes (ISO 648 B ±0.02 and ±0.015 mL, from memory) about 0.4 %. A cylinder
    # is not used for a quantitative transfer a pipette can make (common practice).
    shelf = [
        Device(kind="transfer-pipette", volume_mL=v, device_class="B") for v in (1.0, 2.0, 5.0)
    ]
    cylinder = Device(kind="graduated-cylinder", volume_mL=10.0)
    table = volume_table([*shelf, cylinder], max_volume_mL=25.0)
    three = table.best(3.0)
    assert [d.device for d in three.deliveries] == [
        "transfer-pipette-2mL",
        "transfer-pipette-1mL",
    ]
    # 17 mL: four pipette deliveries (3 x 5 mL, then 2 mL) rather than the cylinder twice.
    seventeen = table.best(17.0)
    assert [d.device for d in seventeen.deliveries] == ["transfer-pipette-5mL"] * 3 + [
        "transfer-pipette-2mL"
    ]
    # 3.4 mL: no pipette makes it, so the cylinder does (its 0.2 mL divisions).
    assert [d.device for d in table.best(3.4).deliveries] == ["graduated-cylinder-10mL"]
    # The listing of every option agrees: no cylinder first where a pipette way exists.
    listed = by_volume(deliverable_volumes([*shelf, cylinder], max_volume_mL=25.0))
    assert listed[3.0].best == ("transfer-pipette-2mL", "transfer-pipette-1mL")
    assert "graduated-cylinder-10mL" in listed[3.4].best
