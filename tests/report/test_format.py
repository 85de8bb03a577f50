"""Tests of planner.report._format: numbers and devices as people read them."""

from __future__ import annotations

import dataclasses

import pytest

from planner.inputs import Device
from planner.report._format import (
    addition_decimals,
    devices_text,
    plain,
    scientific,
    significant,
)
from planner.result import Addition
from tests.report.conftest import make_inputs


@pytest.mark.parametrize(
    ("value", "digits", "text"),
    [
        (1159.2, 4, "1159"),
        (21.0, 4, "21.00"),
        (0.123456, 3, "0.123"),
        (9.99996, 4, "10.00"),
        (0.0, 4, "0"),
        (1.36e-4, 3, "1.36e-4"),
        (2.5e7, 2, "2.5e7"),
        (-0.5, 2, "-0.50"),
    ],
)
def test_significant(value, digits, text):
    assert significant(value, digits) == text


def test_scientific_and_plain():
    assert scientific(7.5e-5, 4) == "7.500e-5"
    assert scientific(0.0) == "0"
    assert plain(250.0) == "250"
    assert plain(0.2) == "0.2"
    assert plain(1.5e-4) == "1.500e-4"


def test_devices_named_by_their_ids():
    # One name per device on every screen and sheet: the id the plan file's glassware gives
    # it (DESIGN.md contract detail 5), a repeated delivery counted.
    devices = ("transfer-pipette-2mL", "transfer-pipette-2mL", "transfer-pipette-0.5mL")
    assert devices_text(devices) == "2 × transfer-pipette-2mL + transfer-pipette-0.5mL"
    assert devices_text(("piston-pipette-100-1000uL",)) == "piston-pipette-100-1000uL"
    assert devices_text(()) == ""


@pytest.mark.parametrize(
    ("devices", "decimals"),
    [
        (("transfer-pipette-5mL",), 2),
        (("buret-25mL",), 2),
        (("graduated-pipette-10mL",), 1),  # the fixture's division_mL = 0.1
        (("transfer-pipette-5mL", "graduated-pipette-10mL"), 2),
        (("piston-pipette-100-1000uL",), 3),  # step 5 µL = 0.005 mL
        (("not-on-the-shelf",), 2),
    ],
)
def test_addition_decimals(devices, decimals):
    inputs = make_inputs()
    shelf = (
        *inputs.glassware,
        Device(kind="piston-pipette", volume_mL=1.0, range_uL=(100.0, 1000.0), step_uL=5.0),
    )
    inputs = dataclasses.replace(inputs, glassware=shelf)
    assert addition_decimals(inputs, Addition("x", 1.0, devices, 1)) == decimals
