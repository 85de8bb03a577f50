"""The bench model through the prediction: presets, GUM against Monte Carlo, class batches."""

from __future__ import annotations

import dataclasses
import json
import re

import numpy as np
import pytest

from planner.pipeline import design_plan
from planner.planfile import parse_plan
from planner.predict.montecarlo import simulate
from planner.predict.uncertainty import propagate
from planner.report.plan_json import plan_json
from planner.resultfile import parse_result
from planner.verify import verify_plan

from .conftest import DEFAULT, TUBES


def _plan_text(technique: str | None, extra: str = "") -> str:
    text = TUBES.read_text(encoding="utf-8")
    # The recipe carries a [bench] table; replace it to choose the preset.
    head, _, _ = text.partition("\n[bench]")
    bench = "" if technique is None else f'\n[bench]\ntechnique = "{technique}"\n{extra}'
    return head + "\n" + bench


@pytest.fixture(scope="module")
def presets():
    """The default's shelf for the all-bound analysis designed under each preset."""
    out = {}
    for technique in ("calibrated", "novice"):
        inputs = parse_plan(_plan_text(technique))
        out[technique] = (inputs, design_plan(inputs))
    return out


def test_novice_range_is_at_least_three_times_the_calibrated(presets) -> None:
    # The acceptance criterion: a first course's bench spreads K at least three times
    # as widely as a calibrated one on the default plan.
    widths = {}
    for technique, (inputs, plan) in presets.items():
        low, high = propagate(inputs, plan.mixtures).K.ci95
        widths[technique] = high - low
    assert widths["novice"] >= 3.0 * widths["calibrated"]


def test_default_plan_s_novice_range_is_at_least_three_times_the_calibrated() -> None:
    # The same criterion on the embedded default, whose analysis is the global fit: the range
    # its answer key prints for K, designed under each preset (about 5.2 against 1.5 L/mol).
    head, _, _ = DEFAULT.read_text(encoding="utf-8").partition("\n[bench]")
    widths = {}
    for technique in ("calibrated", "novice"):
        plan = design_plan(parse_plan(f'{head}\n[bench]\ntechnique = "{technique}"\n'))
        assert plan.analysis == "global-fit"
        assert plan.global_fit is not None
        low, high = plan.global_fit.K_ci95
        widths[technique] = high - low
    assert widths["novice"] >= 3.0 * widths["calibrated"]


@pytest.mark.parametrize("technique", ["calibrated", "novice"])
def test_first_order_and_monte_carlo_agree_under_the_bench_model(presets, technique) -> None:
    # JCGM 101:2008, 8: where the model is near-linear the GUM's standard uncertainty and the
    # Monte Carlo's SD agree; 20000 trials give the SD to about 0.5 % (1/sqrt(2M)), so 5 %
    # leaves room for the small non-linearity of the all-bound K.
    inputs, plan = presets[technique]
    gum = propagate(inputs, plan.mixtures)
    sim = simulate(inputs, plan.mixtures, trials=20_000, rng=np.random.default_rng(12))
    assert sim.all_bound.K.sd == pytest.approx(gum.K.standard_uncertainty, rel=0.05)
    assert sim.all_bound.epsilon.sd == pytest.approx(gum.epsilon.standard_uncertainty, rel=0.05)
    for summary, mixture in zip(sim.readings, gum.mixtures, strict=True):
        assert summary.sd == pytest.approx(mixture.u_absorbance, rel=0.06, abs=2e-4)


def test_stocks_are_common_to_the_class(presets) -> None:
    # The class mean varies with the stock batch, so its SD exceeds what independent benches
    # would give (bench_sd / sqrt(class size)); with exact stocks the two agree.
    inputs, plan = presets["calibrated"]
    sim = simulate(inputs, plan.mixtures, trials=30_000, rng=np.random.default_rng(3))
    spread = sim.all_bound.K_spread
    assert spread is not None
    assert spread.class_size == inputs.session.sets
    independent = spread.bench_sd / np.sqrt(spread.class_size)
    assert spread.class_mean_sd > 1.3 * independent
    exact = dataclasses.replace(
        inputs,
        stocks=tuple(dataclasses.replace(s, relative_uncertainty=0.0) for s in inputs.stocks),
    )
    sim = simulate(exact, plan.mixtures, trials=30_000, rng=np.random.default_rng(3))
    spread = sim.all_bound.K_spread
    assert spread is not None
    # 1000 classes estimate the SD of their mean to about 2.2 % (1/sqrt(2 n)).
    assert spread.class_mean_sd == pytest.approx(
        spread.bench_sd / np.sqrt(spread.class_size), rel=0.1
    )


def test_verify_rederives_the_bench_model(presets) -> None:
    # verify's own u(A) and prediction include the technique and the reading noise: the
    # novice plan verifies, and the same recipes checked against a calibrated bench do not.
    plan = presets["novice"][1]
    document = json.loads(plan_json(plan))
    saved = parse_result(json.dumps(document), source="novice plan.json")
    checks = {c.name: c.status for c in verify_plan(saved.inputs, saved.mixtures, saved.totals)}
    assert checks["reading-uncertainty"] == "pass"
    document["inputs"]["bench"]["technique"] = "calibrated"
    for key in ("pipette_rsd", "cuvette_rsd", "buret_reading_sd_mL"):
        document["inputs"]["bench"][key] = 0.0
    saved = parse_result(json.dumps(document), source="edited plan.json")
    checks = {c.name: c.status for c in verify_plan(saved.inputs, saved.mixtures, saved.totals)}
    assert checks["reading-uncertainty"] == "fail"


def test_bench_terms_widen_every_reading(presets) -> None:
    cal_inputs, cal_plan = presets["calibrated"]
    nov_inputs = presets["novice"][0]
    cal = propagate(cal_inputs, cal_plan.mixtures)
    nov = propagate(nov_inputs, cal_plan.mixtures)
    for a, b in zip(cal.mixtures, nov.mixtures, strict=True):
        assert b.u_absorbance > a.u_absorbance
    names = {c.input for c in nov.K.contributors}
    assert "blank cuvette offset" in names


def _warm_plan_text(technique: str, room_C: float) -> str:
    """The default with an enthalpy for FeSCN2+ and the room at ``room_C``."""
    text = re.sub(r"(?m)^enthalpy_kJ_mol = .*$", "", _plan_text(technique))
    text = text.replace("K = 98\n", "K = 98\nenthalpy_kJ_mol = -6.0\n", 1)
    return text.replace("[session]\n", f"[session]\ntemperature_C = {room_C}\n", 1)


@pytest.fixture(scope="module")
def cool_room():
    inputs = parse_plan(_warm_plan_text("novice", 20.0))
    return inputs, design_plan(inputs)


def test_the_bench_constant_is_van_t_hoffs(cool_room) -> None:
    # Hand value (tests/chem/test_thermodynamics.py): K = 98 at 25 °C with dH = -6.0 kJ/mol
    # is 102.1304 at 20 °C; the plan predicts against that K, for both analyses.
    inputs, plan = cool_room
    assert inputs.reaction.temperature_C == 25.0
    assert plan.prediction is not None
    assert plan.prediction.K_true == pytest.approx(102.1304, rel=1e-5)
    assert plan.global_fit is not None
    assert pytest.approx(102.1304, rel=1e-5) == plan.global_fit.K
    statuses = {c.name: c.status for c in plan.checks}
    assert "fail" not in statuses.values()


def test_room_temperature_spread_enters_both_methods(cool_room) -> None:
    inputs, plan = cool_room
    gum = propagate(inputs, plan.mixtures)
    names = [c.input for c in gum.K.contributors]
    assert "bench temperature" in names
    # Without the enthalpy the same bench has no temperature term and a narrower K.
    still = dataclasses.replace(
        inputs,
        reaction=dataclasses.replace(
            inputs.reaction,
            species=tuple(
                dataclasses.replace(sp, enthalpy_kJ_mol=None) for sp in inputs.reaction.species
            ),
        ),
    )
    assert "bench temperature" not in [
        c.input for c in propagate(still, plan.mixtures).K.contributors
    ]
    sim = simulate(inputs, plan.mixtures, trials=20_000, rng=np.random.default_rng(5))
    assert sim.all_bound.K.sd == pytest.approx(gum.K.standard_uncertainty, rel=0.05)
    assert sim.global_fit.K.sd == pytest.approx(gum.global_fit_K.standard_uncertainty, rel=0.05)
