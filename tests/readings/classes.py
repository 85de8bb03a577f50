"""Synthetic classes for the readings tests, made with an equilibrium model of the tests' own.

The model is written here from the mass balances, independently of the planner's solver and
forward model: for a metal M (in excess) and a ligand L forming ML (beta1) and ML2 (beta2),

    M_T = M + beta1 M L + beta2 M L^2,   L_T = L + beta1 M L + 2 beta2 M L^2,

so M = M_T / (1 + beta1 L + beta2 L^2) and the free ligand L is the root in [0, L_T] of
L + beta1 M L + 2 beta2 M L^2 - L_T (increasing in L), found by scipy.optimize.brentq. The
reading follows Beer-Lambert for ML, A = eps b [ML], seen through stray light s as
A_obs = log10((1 + s) / (10^-A + s)) (the usual stray-light model, e.g. Skoog, Holler and
Crouch, Principles of Instrumental Analysis, 6th ed., 2007, section 13B, from memory).

A class is a list of benches, each reading every mixture of its section's plan (totals from
plan.json's initial_M) with normal noise, and faults planted on chosen benches.
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.optimize import brentq

METAL, LIGAND = "Fe3+", "SCN-"


def complex_M(metal_M: float, ligand_M: float, beta1: float, beta2: float) -> float:
    """[ML] at equilibrium [mol/L] (see the module notes)."""
    if ligand_M <= 0:
        return 0.0

    def excess(free: float) -> float:
        m = metal_M / (1 + beta1 * free + beta2 * free * free)
        return free + beta1 * m * free + 2 * beta2 * m * free * free - ligand_M

    free = brentq(excess, 0.0, ligand_M, xtol=1e-22, rtol=1e-14)
    return beta1 * metal_M / (1 + beta1 * free + beta2 * free * free) * free


def reading(ml_M: float, epsilon: float, path_cm: float, stray: float) -> float:
    """Observed absorbance of [ML] = ml_M (see the module notes)."""
    true = epsilon * path_cm * ml_M
    return math.log10((1 + stray) / (10.0**-true + stray))


@dataclass
class Section:
    """What the tests need of one section's plan.json."""

    ids: list[str]
    roles: list[str]
    metal_M: list[float]
    ligand_M: list[float]
    predicted: list[float]
    epsilon: float
    K: float
    beta2: float
    path_cm: float
    stray: float
    benches: int

    @classmethod
    def of(cls, plan_json: Path) -> Section:
        document = json.loads(plan_json.read_text(encoding="utf-8"))
        inputs = document["inputs"]
        species = {s["name"]: s for s in inputs["reaction"]["species"]}
        one, two = species["FeSCN2+"], species["Fe(SCN)2+"]
        k = one["K"] if "K" in one else 10 ** one["log_beta"]
        beta2 = two["K"] if "K" in two else 10 ** two["log_beta"]
        mixtures = document["mixtures"]
        return cls(
            ids=[m["id"] for m in mixtures],
            roles=[m["role"] for m in mixtures],
            metal_M=[m["initial_M"].get(METAL, 0.0) for m in mixtures],
            ligand_M=[m["initial_M"].get(LIGAND, 0.0) for m in mixtures],
            predicted=[m["absorbance"] for m in mixtures],
            epsilon=one["epsilon"],
            K=k,
            beta2=beta2,
            path_cm=inputs["instrument"]["path_length_cm"],
            stray=inputs["instrument"]["stray_light"],
            benches=inputs["session"]["benches_per_section"],
        )

    def readings(
        self,
        *,
        K: float | None = None,
        ligand_factor: dict[str, float] | None = None,
        path_cm: float | None = None,
    ) -> list[float]:
        """Noise-free readings of every mixture, with the true K (default the plan's),
        a ligand delivery changed by a factor in some mixtures, or another path length."""
        k = self.K if K is None else K
        beta2 = self.beta2 * k / self.K  # the stepwise constant K2 kept as the plan's
        factors = ligand_factor or {}
        return [
            reading(
                complex_M(metal, ligand * factors.get(mixture_id, 1.0), k, beta2),
                self.epsilon,
                self.path_cm if path_cm is None else path_cm,
                self.stray,
            )
            for mixture_id, metal, ligand in zip(self.ids, self.metal_M, self.ligand_M, strict=True)
        ]


@dataclass
class Fault:
    """A fault planted on one bench: a slipped pipette (the ligand of one standard short), a
    swapped cuvette (another path length) or a mislabelled tube (two tests swapped)."""

    kind: str
    section: int
    bench: int
    detail: dict[str, object] = field(default_factory=dict)


def class_rows(
    sections: dict[int, Section],
    rng: np.random.Generator,
    *,
    noise: float = 0.003,
    faults: list[Fault] = (),
    K: float | None = None,
) -> list[tuple[int, int, int, str, float]]:
    """(section, bench, replicate, mixture, reading) of a whole class, one replicate."""
    rows = []
    for number, section in sorted(sections.items()):
        for bench in range(1, section.benches + 1):
            fault = next((f for f in faults if (f.section, f.bench) == (number, bench)), None)
            kind = fault.kind if fault else ""
            values = section.readings(
                K=K,
                ligand_factor=(
                    {fault.detail["mixture"]: fault.detail["factor"]} if kind == "slip" else None
                ),
                path_cm=fault.detail["path_cm"] if kind == "cuvette" else None,
            )
            values = list(np.array(values) + rng.normal(0.0, noise, len(values)))
            if kind == "swap":
                a, b = (section.ids.index(m) for m in fault.detail["mixtures"])
                values[a], values[b] = values[b], values[a]
            rows.extend(
                (number, bench, 1, mixture_id, value)
                for mixture_id, value in zip(section.ids, values, strict=True)
            )
    return rows


def rows_csv(rows, header=("section", "bench", "replicate", "mixture", "absorbance")) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    for section, bench, replicate, mixture, value in rows:
        writer.writerow([section, bench, replicate, mixture, repr(float(value))])
    return buffer.getvalue()
