"""Words for the bench model and the bias causes, shared by the terminal and the answer key.

What the predicted ranges include (glassware, stocks as one class batch, the reading noise's
terms, each bench term the plan's ``[bench]`` sets, and the preset), and the all-bound K's
bias split by cause, written once so every sheet says the same.
"""

from __future__ import annotations

import math

from planner.analysis import far_off
from planner.inputs import PlanInputs
from planner.lab.bench import bench_terms
from planner.report._format import percent, relative_bias
from planner.result import BiasCauses

__all__ = ["bias_line", "medium_line", "ranges_line"]

_TERM_WORDS = {
    "buret_reading_sd_mL": "buret readings",
    "pipette_rsd": "pipetting",
    "piston_rsd": "piston-pipette handling",
    "cuvette_rsd": "cuvette placement",
    "blank_offset_sd": "blank-cuvette offset",
    "temperature_sd_C": "room temperature",
}


def ranges_line(inputs: PlanInputs) -> str:
    """One sentence: which error terms the predicted ranges include, and the preset used."""
    instrument = inputs.instrument
    noise = ["a floor"]
    if instrument.absorbance_rsd > 0:
        noise.append("a part proportional to A")
    if instrument.transmittance_sd > 0:
        noise.append("constant transmittance noise")
    kinds = {device.kind for device in inputs.glassware}
    applies = {
        "buret_reading_sd_mL": "buret" in kinds,
        "pipette_rsd": bool(kinds & {"transfer-pipette", "graduated-pipette"}),
        "piston_rsd": "piston-pipette" in kinds,
        "temperature_sd_C": any(sp.enthalpy_kJ_mol for sp in inputs.reaction.species),
    }
    terms = [_TERM_WORDS[name] for name in bench_terms(inputs.bench) if applies.get(name, True)]
    bench = inputs.bench.technique
    technique = (
        f"the {bench} bench ({', '.join(terms)})"
        if bench != "none" and terms
        else "no bench technique (an ideal bench: add [bench] to the plan file)"
    )
    return (
        "Ranges include the glassware's tolerances, the stocks (one batch for the class), "
        f"reading noise ({', '.join(noise)}) and {technique}."
    )


def bias_line(causes: BiasCauses | None) -> str:
    """The all-bound K's bias by cause, or "" when there is none to give.

    The causes the prediction includes multiply to its bias; the ionic medium's share is not
    in the predicted values (the constants are the plan's, at its reference ionic strength)
    and is said apart.
    """
    if causes is None:
        return ""
    together = (
        (1.0 + causes.all_bound_assumption)
        * (1.0 + causes.absorbing_reagents)
        * (1.0 + causes.stray_light)
        * (1.0 + causes.temperature)
    ) - 1.0
    parts = [
        ("the all-bound assumption", causes.all_bound_assumption),
        ("absorbing reagents", causes.absorbing_reagents),
        ("stray light", causes.stray_light),
        ("temperature", causes.temperature),
    ]
    if any(far_off(value) for _, value in parts):
        # Shares of a factor of a million (-100 % and +2.5e7 %) multiply correctly and mean
        # nothing to a reader: the whole is said instead.
        text = (
            f"The all-bound K's bias, {relative_bias(together, 2)}, is too large to split by "
            "cause: the all-bound analysis gives no estimate of K from these mixtures."
        )
    else:
        text = (
            "The all-bound K's bias comes from "
            + ", ".join(f"{name} {percent(value, 2, signed=True)}" for name, value in parts)
            + "."
        )
    if math.isfinite(causes.ionic_medium) and causes.ionic_medium != 0:
        text += " " + medium_line(causes.ionic_medium)
    return text


def medium_line(bias: float) -> str:
    """One sentence: how each mixture's own ionic medium would move a K the sheet predicts."""
    return (
        "Not in these values: each mixture's own ionic strength would move K by a further "
        f"{percent(bias, 2, signed=True)} (the constants refer to the plan's ionic strength; "
        "design.ionic_medium makes every mixture the same)."
    )
