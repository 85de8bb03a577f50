"""The bench: how a person's technique and the photometer's noise add to the glassware's errors.

The glassware's tolerances (:mod:`planner.lab.tolerances`) bound the errors of the device; a
real bench adds the errors of the hand that uses it and of the reading. This module holds, in
one place, the technique presets of the plan file's ``[bench]`` table and the two models
every uncertainty calculation of the planner uses:

- :func:`technique_sd_mL`: the technique's random error of one delivery by a device (normal,
  independent per delivery), on top of the device's own tolerance;
- :func:`reading_sd`: the standard deviation of one photometer reading, a three-term
  precision model (a floor, a term proportional to the absorbance, and constant
  transmittance noise), plus the bench's cuvette placement.

Presets
-------
``calibrated``: an analyst with calibrated glassware, one matched cuvette in a fixed
orientation and a thermostatted cell holder; ``practised``: a careful bench with class A
glassware used by the book, matched cuvettes, room temperature; ``novice``: a first course's
bench. Every value names its source or is marked common practice in :data:`PRESETS`.

References
----------
D. C. Harris, Quantitative Chemical Analysis, 9th ed., W. H. Freeman, 2015, chapter 2
(burets: each reading is estimated to about +/-0.02 mL; transfer pipettes) (from memory).
L. D. Rothman, S. R. Crouch and J. D. Ingle Jr., "Theoretical and experimental investigation
of factors affecting precision in molecular absorption spectrophotometry", Analytical
Chemistry 47 (1975) 1226-1233, doi:10.1021/ac60358a029 (from memory): reading noise as the
sum of a constant-transmittance term (readout and detector noise), a shot-noise term and a
term proportional to T (source flicker, cell positioning), which in absorbance is a floor.
D. A. Skoog, F. J. Holler and S. R. Crouch, Principles of Instrumental Analysis, 7th ed.,
2017, section 13C-2 and its table of instrumental noise categories (from memory).
"""

from __future__ import annotations

import math
from dataclasses import fields

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.inputs import Bench, Device, Instrument
from planner.records import record

__all__ = [
    "BENCH_TERMS",
    "PRESETS",
    "PRESET_SOURCES",
    "TECHNIQUES",
    "Preset",
    "bench_terms",
    "bench_values",
    "preset_bench",
    "reading_sd",
    "technique_sd_mL",
]

#: log10(e): dA/dT = -log10(e)/T for A = -log10 T [unitless].
_LOG10_E = 1.0 / math.log(10.0)

#: Readings per buret delivery: the level before and the level after.
BURET_READINGS_PER_DELIVERY = 2

#: Kinds whose delivery depends on drainage, meniscus and touch-off (``pipette_rsd``).
_PIPETTES = frozenset({"transfer-pipette", "graduated-pipette"})


@record
class Preset:
    """The values of one technique preset (units as :class:`planner.inputs.Bench`)."""

    buret_reading_sd_mL: float
    pipette_rsd: float
    piston_rsd: float
    cuvette_rsd: float
    blank_offset_sd: float
    temperature_sd_C: float


#: The bench terms in the plan file's order: the fields of :class:`Preset`, and of
#: :class:`planner.inputs.Bench` beside its ``technique``.
BENCH_TERMS: tuple[str, ...] = tuple(field.name for field in fields(Preset))

#: The technique presets (names ours), one row a preset, one column a term of
#: :data:`BENCH_TERMS`. Sources per term in :data:`PRESET_SOURCES`.
_PRESET_TABLE: dict[str, tuple[float, float, float, float, float, float]] = {
    # name:        (buret_reading_sd_mL, pipette_rsd, piston_rsd, cuvette_rsd,
    #               blank_offset_sd, temperature_sd_C)
    "calibrated": (0.01, 0.0005, 0.002, 0.001, 0.001, 0.2),
    "practised": (0.02, 0.002, 0.005, 0.005, 0.003, 1.0),
    "novice": (0.05, 0.01, 0.02, 0.02, 0.01, 2.0),
}

#: The technique presets by name.
PRESETS: dict[str, Preset] = {name: Preset(*row) for name, row in _PRESET_TABLE.items()}

#: Technique names the plan file accepts.
TECHNIQUES = tuple(PRESETS)

#: Where each preset term comes from (printed in docs/plan-file.md and the answer key).
PRESET_SOURCES: dict[str, str] = {
    "buret_reading_sd_mL": (
        "Harris, Quantitative Chemical Analysis, 9th ed., 2015, ch. 2: a buret reading is "
        "estimated to about +/-0.02 mL (from memory; the practised value); 0.01 and 0.05 mL "
        "are common practice for a calibrated analyst and a novice"
    ),
    "pipette_rsd": (
        "common practice: drainage, meniscus and touch-off repeat to about 0.05 % with "
        "calibrated pipettes, 0.2 % with practised technique, 1 % at a first attempt"
    ),
    "piston_rsd": (
        "common practice, beside the ISO 8655-2:2002 random limits the catalogue already "
        "applies: pre-rinsing, angle and immersion depth add about 0.2 %, 0.5 % and 2 %"
    ),
    "cuvette_rsd": (
        "common practice: path-length mismatch and placement (orientation, fingerprints, "
        "bubbles) of about 0.1 % with one cuvette fixed in place, 0.5 % with matched "
        "cuvettes, 2 % at a first attempt"
    ),
    "blank_offset_sd": (
        "common practice: matched cuvettes agree to a few thousandths of an absorbance "
        "unit; unmatched or smudged ones to about 0.01"
    ),
    "temperature_sd_C": (
        "common practice: a thermostatted cell holder holds about 0.2 °C; an unconditioned "
        "teaching room spreads by 1-2 °C between benches and hours"
    ),
}


def technique_sd_mL(bench: Bench, device: Device, volume_mL: float) -> float:
    """Standard deviation of the technique's error of one delivery [mL].

    Parameters
    ----------
    bench
        The bench model.
    device
        The delivering device.
    volume_mL
        Volume of this one delivery [mL].

    Returns
    -------
    float
        Burets: sqrt(2) ``buret_reading_sd_mL`` (the level is read before and after, each
        reading with its own error); transfer and graduated pipettes: ``pipette_rsd`` times
        the volume; piston pipettes: ``piston_rsd`` times the volume; other devices 0 (a
        graduated cylinder's tolerance already dwarfs its reading).

    Notes
    -----
    Normal, independent per delivery, and added in quadrature to the device's own random
    error (JCGM 100:2008, eq. 10).
    """
    if device.kind == "buret":
        return math.sqrt(BURET_READINGS_PER_DELIVERY) * bench.buret_reading_sd_mL
    if device.kind in _PIPETTES:
        return bench.pipette_rsd * abs(volume_mL)
    if device.kind == "piston-pipette":
        return bench.piston_rsd * abs(volume_mL)
    return 0.0


def reading_sd(instrument: Instrument, bench: Bench, absorbance: ArrayLike) -> NDArray[np.float64]:
    """Standard deviation of one photometer reading, heteroscedastic [absorbance units].

    Parameters
    ----------
    instrument
        The photometer: ``absorbance_sd`` (floor), ``absorbance_rsd`` (proportional term) and
        ``transmittance_sd`` (constant transmittance noise).
    bench
        The bench: ``cuvette_rsd`` (path length and placement, proportional to A).
    absorbance
        The reading A (stray light applied, blank not subtracted), any shape.

    Returns
    -------
    NDArray[np.float64]
        sigma_A = sqrt(s0^2 + (r A)^2 + (log10(e) sigma_T 10^A)^2), with r^2 the sum of the
        squares of ``absorbance_rsd`` and ``cuvette_rsd``; same shape as ``absorbance``.

    Notes
    -----
    The three independent terms of the precision models of absorption photometry (Rothman,
    Crouch and Ingle, Anal. Chem. 47 (1975) 1226; Skoog, Holler and Crouch, 7th ed., 2017,
    section 13C-2; both from memory): constant transmittance noise sigma_T (readout, dark
    current) becomes sigma_A = log10(e) sigma_T / T by first-order propagation through
    A = -log10 T (JCGM 100:2008, eq. 10); noise proportional to T (source flicker, cell
    positioning) becomes a constant sigma_A, the floor; a relative error of the path length
    or of the placement of the cuvette scales A itself. Shot noise, between the two, is not
    separated: the floor and the transmittance term bracket it.
    """
    a = np.asarray(absorbance, dtype=float)
    rsd_squared = instrument.absorbance_rsd**2 + bench.cuvette_rsd**2
    # 10^A overflows only far beyond any reading (the term is then infinite, or nothing when
    # the plan has no transmittance noise, rather than inf x 0).
    with np.errstate(over="ignore"):
        transmittance_term = (
            _LOG10_E * instrument.transmittance_sd * 10.0**a
            if instrument.transmittance_sd > 0
            else np.zeros_like(a)
        )
    variance = instrument.absorbance_sd**2 + rsd_squared * a**2 + transmittance_term**2
    return np.asarray(np.sqrt(variance), dtype=float)


def bench_values(bench: Bench) -> dict[str, float]:
    """Every bench term of :data:`BENCH_TERMS` -> its value in ``bench``."""
    return {name: getattr(bench, name) for name in BENCH_TERMS}


def bench_terms(bench: Bench) -> tuple[str, ...]:
    """Names of the bench terms that are not zero, in the plan file's order."""
    return tuple(name for name, value in bench_values(bench).items() if value > 0)


def preset_bench(technique: str) -> Bench:
    """The bench of a preset, every term at the preset's value.

    Raises
    ------
    KeyError
        For a name not in :data:`PRESETS` (the plan-file reader and the CLI offer only those).
    """
    preset = PRESETS[technique]
    return Bench(technique=technique, **{name: getattr(preset, name) for name in BENCH_TERMS})
