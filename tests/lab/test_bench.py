"""The bench model: technique presets and the three-term reading noise (planner.lab.bench)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.inputs import Bench, Device, Instrument
from planner.lab.bench import PRESET_SOURCES, PRESETS, bench_terms, reading_sd, technique_sd_mL


def _instrument(sd: float = 0.0, rsd: float = 0.0, sigma_t: float = 0.0) -> Instrument:
    return Instrument(
        wavelength_nm=450,
        path_length_cm=1.0,
        absorbance_window=(0.1, 0.9),
        absorbance_sd=sd,
        stray_light=0.0,
        cuvette_fill_mL=3.0,
        absorbance_rsd=rsd,
        transmittance_sd=sigma_t,
    )


def test_constant_transmittance_term_is_the_published_form() -> None:
    # Constant sigma_T: sigma_A = 0.434 sigma_T / T (Skoog, Holler and Crouch, Principles of
    # Instrumental Analysis, 7th ed., 2017, section 13C-2, from memory). By hand: at A = 1,
    # T = 0.1 and sigma_T = 0.002, 0.4343 * 0.002 / 0.1 = 0.008686; at A = 0, 0.0008686.
    sd = reading_sd(_instrument(sigma_t=0.002), Bench(), [0.0, 1.0])
    assert sd == pytest.approx([0.0008686, 0.008686], rel=1e-4)


def test_three_terms_add_in_quadrature() -> None:
    # Rothman, Crouch and Ingle, Anal. Chem. 47 (1975) 1226 (from memory): independent noise
    # terms add as variances. By hand at A = 0.5 with s0 = 0.003, r = 0.01, sigma_T = 0.001:
    # (0.003)^2 + (0.005)^2 + (0.4343 * 0.001 * 10^0.5 = 0.0013734)^2 = 35.886e-6 -> 0.0059905.
    sd = float(reading_sd(_instrument(0.003, 0.01, 0.001), Bench(), 0.5))
    assert sd == pytest.approx(0.0059905, rel=1e-4)


def test_cuvette_placement_scales_with_the_reading() -> None:
    # cuvette_rsd 0.02 at A = 0.8 adds 0.016 in quadrature to the 0.003 floor: 0.016279.
    sd = float(reading_sd(_instrument(0.003), Bench(cuvette_rsd=0.02), 0.8))
    assert sd == pytest.approx(math.hypot(0.003, 0.016), rel=1e-12)
    assert sd == pytest.approx(0.016279, rel=1e-4)


def test_constant_transmittance_noise_has_its_relative_minimum_near_0_434() -> None:
    # Ringbom: sigma_A / A is least at A = 1/ln 10 = 0.4343 for constant sigma_T.
    a = np.linspace(0.05, 2.0, 3901)
    relative = reading_sd(_instrument(sigma_t=0.003), Bench(), a) / a
    assert a[int(np.argmin(relative))] == pytest.approx(0.4343, abs=1e-3)


def test_technique_per_delivery_by_hand() -> None:
    bench = Bench(buret_reading_sd_mL=0.02, pipette_rsd=0.01, piston_rsd=0.02)
    buret = Device(kind="buret", volume_mL=25, division_mL=0.05)
    pipette = Device(kind="transfer-pipette", volume_mL=5)
    piston = Device(kind="piston-pipette", volume_mL=1, range_uL=(100, 1000), step_uL=1)
    cylinder = Device(kind="graduated-cylinder", volume_mL=50)
    # Two readings of SD 0.02 mL: sqrt(2) * 0.02 = 0.028284 mL, whatever the volume.
    assert technique_sd_mL(bench, buret, 3.0) == pytest.approx(0.028284, rel=1e-4)
    assert technique_sd_mL(bench, buret, 12.0) == pytest.approx(0.028284, rel=1e-4)
    assert technique_sd_mL(bench, pipette, 5.0) == pytest.approx(0.05)
    assert technique_sd_mL(bench, piston, 0.5) == pytest.approx(0.01)
    assert technique_sd_mL(bench, cylinder, 20.0) == 0.0


def test_presets_widen_from_calibrated_to_novice_and_name_their_sources() -> None:
    calibrated, practised, novice = (PRESETS[n] for n in ("calibrated", "practised", "novice"))
    for name in PRESET_SOURCES:
        low, mid, high = (getattr(p, name) for p in (calibrated, practised, novice))
        assert 0 < low <= mid <= high, name
        source = PRESET_SOURCES[name]
        assert "from memory" in source or "common practice" in source, name
    assert bench_terms(Bench()) == ()
    assert bench_terms(Bench(cuvette_rsd=0.01)) == ("cuvette_rsd",)
