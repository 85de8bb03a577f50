"""Words for the bench model and the bias causes, shared by the terminal and the answer key.

What the predicted ranges include (glassware, stocks as one class batch, the reading noise's
terms, each bench term the plan's ``[bench]`` sets, and the preset), and the all-bound K's
bias split by cause, written once so every sheet says the same.
"""

from __future__ import annotations

from planner.inputs import PlanInputs
from planner.lab.bench import bench_terms
from planner.report._format import percent
from planner.result import BiasCauses

__all__ = ["bias_line", "ranges_line"]

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
    """One sentence: the all-bound K's bias by cause, or "" when there is none to give."""
    if causes is None:
        return ""
    parts = [
        ("all-bound assumption", causes.all_bound_assumption),
        ("ionic medium", causes.ionic_medium),
        ("absorbing reagents", causes.absorbing_reagents),
        ("stray light", causes.stray_light),
        ("temperature", causes.temperature),
    ]
    return (
        "Bias of the all-bound K by cause: "
        + ", ".join(f"{name} {percent(value, signed=True)}" for name, value in parts)
        + "."
    )
