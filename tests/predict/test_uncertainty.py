"""Tests of planner.predict.uncertainty: the first-order (GUM) budget of the all-bound analysis.

The reference is the `uncertainties` package (an independent, general-purpose implementation
of linear error propagation by automatic differentiation): the same measurement model is
written out below with its ufloats, every elementary input one ufloat, so correlations come from
shared ufloats exactly as JCGM 100:2008, 5.2 treats them. Agreement within 1 % is asked (the
issue's tolerance); both are first-order, so they agree to rounding.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from uncertainties import ufloat

from planner.chem.equilibrium import solve_equilibrium
from planner.errors import InvalidInputError
from planner.lab.deliveries import devices_by_id
from planner.lab.tolerances import piston_errors_uL, tolerance_mL
from planner.predict.uncertainty import (
    COVERAGE_FACTOR_95,
    prediction_from,
    propagate,
)

SQRT6 = math.sqrt(6.0)
GRADUATED = {"buret", "graduated-pipette", "graduated-cylinder"}


def _reference(plan):
    """eps (origin), eps (intercept), mean K and K per test as ufloats.

    The error model restated from its documentation (planner/predict/_experiment.py): one
    relative error per stock; a transfer pipette's tolerance a is one systematic error per
    device, u = a/sqrt(6) (EURACHEM/CITAC CG4, 3rd ed., 2012, triangular); a graduated device's
    is independent per delivery; a piston pipette has a systematic error per device
    (limit/sqrt(6)) and a random one per delivery (the ISO 8655-2 random limit, an SD); each
    flask's volume is independent; each reading has SD absorbance_sd. The bench (the plan's
    [bench], docs/plan-file.md): each delivery adds its own normal technique error (a buret
    read twice, sqrt(2) buret_reading_sd_mL; a pipette pipette_rsd of its volume; a piston
    pipette piston_rsd); each reading's SD is sqrt(s0^2 + ((r^2 + cuvette_rsd^2) A^2) +
    (sigma_T / (T ln 10))^2) (three-term precision model, Rothman, Crouch and Ingle, Anal.
    Chem. 47 (1975) 1226, from memory); one blank-cuvette offset is shared by the blanks.
    """
    inputs = plan.inputs
    shelf = devices_by_id(inputs.glassware)
    components = inputs.reaction.components
    limiting = inputs.design.limiting
    excess = next(c for c in components if c != limiting)
    b = inputs.instrument.path_length_cm
    relative = {
        st.id: ufloat(0.0, st.relative_uncertainty) if st.relative_uncertainty > 0 else 0.0
        for st in inputs.stocks
    }
    shared = {}
    flask = inputs.design.vessel != "tube"
    diluent = inputs.diluent.id

    bench = inputs.bench

    def technique(device, volume):
        u = 0.0
        if device.kind == "buret":
            u = math.sqrt(2.0) * bench.buret_reading_sd_mL
        elif device.kind in {"transfer-pipette", "graduated-pipette"}:
            u = bench.pipette_rsd * volume
        elif device.kind == "piston-pipette":
            u = bench.piston_rsd * volume
        return ufloat(0.0, u) if u > 0 else 0.0

    def delivery_error(device_id, volume):
        device = shelf[device_id]
        u = tolerance_mL(device) / SQRT6
        hand = technique(device, volume)
        if device.kind == "transfer-pipette":
            return shared.setdefault(device_id, ufloat(0.0, u)) + hand
        if device.kind in GRADUATED:
            return ufloat(0.0, u) + hand
        assert device.kind == "piston-pipette"
        random_uL = piston_errors_uL(device, device.volume_mL * 1000)[1]
        return shared.setdefault(device_id, ufloat(0.0, u)) + ufloat(0.0, random_uL / 1000) + hand

    instrument = inputs.instrument

    def reading_sd(a):
        proportional = (instrument.absorbance_rsd**2 + bench.cuvette_rsd**2) * a * a
        transmittance = instrument.transmittance_sd / (10.0**-a * math.log(10.0))
        return math.sqrt(instrument.absorbance_sd**2 + proportional + transmittance**2)

    blank_offset = ufloat(0.0, bench.blank_offset_sd) if bench.blank_offset_sd > 0 else 0.0
    reaction = inputs.reaction
    enthalpy = [sp.enthalpy_kJ_mol or 0.0 for sp in reaction.species]
    moves = bench.temperature_sd_C > 0 and any(enthalpy)
    bench_temperature = ufloat(0.0, bench.temperature_sd_C) if moves else 0.0

    def per_kelvin(m):
        # van 't Hoff by hand, ln(K2/K1) = -(dH/R)(1/T2 - 1/T1), R = 8.314462618 J/(mol K),
        # read through the solver, Beer-Lambert and the stray light; central, 0.01 K.
        room = inputs.session.temperature_C or reaction.temperature_C
        totals = [[m.initial_M.get(c, 0.0) for c in reaction.components]]
        s = instrument.stray_light

        def read(t):
            logs = [
                sp.log_beta
                - h
                * 1000
                / 8.314462618
                * (1 / (t + 273.15) - 1 / (reaction.temperature_C + 273.15))
                / math.log(10)
                for sp, h in zip(reaction.species, enthalpy, strict=True)
            ]
            eq = solve_equilibrium(totals, reaction.stoichiometry(), logs)
            true_a = instrument.path_length_cm * float(eq.species_M[0] @ reaction.species_epsilon())
            return math.log10((1 + s) / (10**-true_a + s))

        return (read(room + 0.01) - read(room - 0.01)) / 0.02

    totals = {}
    readings = {}
    for m in plan.mixtures:
        volumes = {}
        for a in m.additions:
            if flask and a.stock == diluent:
                continue
            volumes[a.stock] = volumes.get(a.stock, 0.0) + a.volume_mL
            for delivery in a.deliveries:
                volumes[a.stock] = volumes[a.stock] + delivery_error(
                    delivery.device, delivery.volume_mL
                )
        if flask:
            (flask_device,) = (d for d in inputs.glassware if d.kind == "volumetric-flask")
            total = ufloat(m.total_volume_mL, tolerance_mL(flask_device) / SQRT6)
            volumes[diluent] = total - sum(volumes.values())
        else:
            total = sum(volumes.values())
        totals[m.id] = {
            c: sum(
                inputs.stock(s).contains_M.get(c, 0.0) * (1 + relative[s]) * v
                for s, v in volumes.items()
            )
            / total
            for c in components
        }
        readings[m.id] = ufloat(m.absorbance, reading_sd(m.absorbance))
        if moves:
            readings[m.id] = readings[m.id] + per_kelvin(m) * bench_temperature
        if m.role == "blank":
            readings[m.id] = readings[m.id] + blank_offset
    blanks = [m.id for m in plan.mixtures if m.role == "blank"]
    standards = [m.id for m in plan.mixtures if m.role == "standard"]
    tests = [m.id for m in plan.mixtures if m.role == "test"]
    a0 = sum(readings[i] for i in blanks) / len(blanks)
    c = [totals[i][limiting] for i in standards]
    a = [readings[i] - a0 for i in standards]
    n = len(standards)
    eps = sum(ci * ai for ci, ai in zip(c, a, strict=True)) / (b * sum(ci * ci for ci in c))
    # Ordinary least-squares slope (Draper and Smith, Applied Regression Analysis, 3rd ed.,
    # 1998, eq. 1.2.9, from memory).
    sxy = n * sum(ci * ai for ci, ai in zip(c, a, strict=True)) - sum(c) * sum(a)
    sxx = n * sum(ci * ci for ci in c) - sum(c) ** 2
    eps_intercept = sxy / sxx / b
    ks = []
    for i in tests:
        x = (readings[i] - a0) / (eps * b)
        ks.append(x / ((totals[i][excess] - x) * (totals[i][limiting] - x)))
    return eps, eps_intercept, sum(ks) / len(ks), ks


@pytest.mark.parametrize("name", ["tubes_plan", "flask_plan", "piston_plan"])
def test_matches_uncertainties_package(name, request):
    plan = request.getfixturevalue(name)
    result = propagate(plan.inputs, plan.mixtures)
    eps, eps_intercept, k_mean, ks = _reference(plan)
    # Values: the same model at the same estimates (rounding only).
    assert result.epsilon.value == pytest.approx(eps.nominal_value, rel=1e-12)
    assert result.epsilon_intercept.value == pytest.approx(eps_intercept.nominal_value, rel=1e-12)
    assert result.K.value == pytest.approx(k_mean.nominal_value, rel=1e-12)
    # Uncertainties: within 1 % of the independent package (issue 4 item 1).
    assert result.epsilon.standard_uncertainty == pytest.approx(eps.std_dev, rel=0.01)
    assert result.epsilon_intercept.standard_uncertainty == pytest.approx(
        eps_intercept.std_dev, rel=0.01
    )
    assert result.K.standard_uncertainty == pytest.approx(k_mean.std_dev, rel=0.01)
    for (value, u), reference in zip(result.K_per_test, ks, strict=True):
        assert value == pytest.approx(reference.nominal_value, rel=1e-12)
        assert u == pytest.approx(reference.std_dev, rel=0.01)


def test_reading_coefficients_by_hand(tubes_plan):
    # Hand derivation for eps = sum c_k (A_k - A_0) / (b sum c_k^2): d eps / d A_k =
    # c_k / (b sum c^2), and d eps / d A_0 = -sum c / (b sum c^2) (one blank).
    plan = tubes_plan
    result = propagate(plan.inputs, plan.mixtures)
    standards = plan.by_role("standard")
    c = np.array([m.initial_M["SCN-"] for m in standards])
    b = plan.inputs.instrument.path_length_cm
    by_input = {row.input: row for row in result.epsilon.contributors}
    for k, m in enumerate(standards):
        assert by_input[f"reading of {m.id}"].sensitivity == pytest.approx(
            c[k] / (b * (c * c).sum()), rel=1e-9
        )
    assert by_input["reading of B1"].sensitivity == pytest.approx(
        -c.sum() / (b * (c * c).sum()), rel=1e-9
    )
    # The intercept fit does not depend on the blank at all (a constant offset moves only
    # the intercept), so the blank's reading is no contributor there.
    assert "reading of B1" not in {row.input for row in result.epsilon_intercept.contributors}


def test_stock_coefficient_by_hand(tubes_plan):
    # Hand derivation: scaling the limiting stock by (1 + r) scales every c_k, and eps is
    # homogeneous of degree -1 in c, so d eps / d r = -eps (JCGM 100:2008, 5.1.3, relative
    # form).
    result = propagate(tubes_plan.inputs, tubes_plan.mixtures)
    row = next(
        r for r in result.epsilon.contributors if r.input == "stock thiocyanate concentration"
    )
    assert row.sensitivity == pytest.approx(-result.epsilon.value, rel=1e-9)
    assert row.unit == "relative"


def test_budget_is_ordered_and_complete(tubes_plan):
    result = propagate(tubes_plan.inputs, tubes_plan.mixtures)
    for budget in (result.epsilon, result.epsilon_intercept, result.K):
        shares = [row.share for row in budget.contributors]
        assert shares == sorted(shares, reverse=True)
        assert sum(shares) == pytest.approx(1.0, rel=1e-12)
        # The variance is the sum of the squared contributions (JCGM 100:2008, eq. 10).
        assert math.sqrt(sum(r.contribution**2 for r in budget.contributors)) == pytest.approx(
            budget.standard_uncertainty, rel=1e-12
        )
        kinds = {row.kind for row in budget.contributors}
        assert {"stock", "reading"} <= kinds
        assert all(row.formula for row in budget.contributors)


def test_formulas_are_the_derived_derivatives(tubes_plan):
    result = propagate(tubes_plan.inputs, tubes_plan.mixtures)
    by_input = {row.input: row for row in result.epsilon.contributors}
    # d/dA_k of (c_k (A_k - A_0) + P - A_0 C) / (b (c_k^2 + Q)), as sympy prints it.
    assert "∂ε/∂A_k = c_k/(b*(Q + c_k**2))" in by_input["reading of S1"].formula
    k_rows = {row.input: row for row in result.K.contributors}
    assert "∂K/∂M = -x/((L - x)*(M - x)**2)" in k_rows["stock iron-dilute concentration"].formula


def test_systematic_device_shared_across_deliveries(flask_plan):
    # The 10 mL transfer pipette delivers twice into every mixture: one systematic input.
    result = propagate(flask_plan.inputs, flask_plan.mixtures)
    names = [row.input for row in result.K.contributors]
    assert names.count("transfer-pipette-10mL systematic error") == 1
    assert any(name.startswith("flask volume of ") for name in names)


def test_blank_reading_uncertainty_is_the_noise(tubes_plan):
    # The blank holds no absorber (only free iron(III), epsilon 0 in the plan), so its
    # reading's uncertainty is the reading noise alone: at A = 0 the floor, the constant
    # transmittance noise 0.4343 sigma_T / T with T = 1 (Skoog et al. 2017, 13C-2, from
    # memory), and the blank cuvette's offset against the samples' cuvette.
    result = propagate(tubes_plan.inputs, tubes_plan.mixtures)
    blank = next(m for m in result.mixtures if m.id == "B1")
    floor = tubes_plan.inputs.instrument.absorbance_sd
    transmittance = 0.4343 * tubes_plan.inputs.instrument.transmittance_sd
    offset = tubes_plan.inputs.bench.blank_offset_sd
    assert offset > 0
    assert transmittance > 0
    expected = math.sqrt(floor**2 + transmittance**2 + offset**2)
    assert blank.u_absorbance == pytest.approx(expected, rel=1e-4)
    standard = next(m for m in result.mixtures if m.id == "S5")
    assert standard.u_absorbance > tubes_plan.inputs.instrument.absorbance_sd


def test_total_uncertainty_by_hand(tubes_plan):
    # Hand derivation for the blank's iron(III) total c = c_s V_s / (V_s + V_acid) in a tube,
    # both delivered by one buret each (independent graduated deliveries):
    # u^2(c)/c^2 = u_r^2 + (u_V (1/V_s - 1/V))^2 + (u_V / V)^2.
    plan = tubes_plan
    result = propagate(plan.inputs, plan.mixtures)
    blank = next(m for m in plan.mixtures if m.id == "B1")
    volumes = {a.stock: a.volume_mL for a in blank.additions}
    assert set(volumes) == {"acid", "iron-strong"}
    buret = next(d for d in plan.inputs.glassware if d.kind == "buret")
    # The tolerance's triangular u and two readings of the bench's buret reading SD.
    u_v = math.sqrt(
        (tolerance_mL(buret) / SQRT6) ** 2 + 2 * plan.inputs.bench.buret_reading_sd_mL**2
    )
    v_s, total = volumes["iron-strong"], sum(volumes.values())
    c = blank.initial_M["Fe3+"]
    u_r = plan.inputs.stock("iron-strong").relative_uncertainty
    expected = c * math.sqrt(u_r**2 + (u_v * (1 / v_s - 1 / total)) ** 2 + (u_v / total) ** 2)
    got = next(m for m in result.mixtures if m.id == "B1").u_totals_M["Fe3+"]
    assert got == pytest.approx(expected, rel=1e-9)


def test_prediction_fills_the_plan(tubes_plan):
    result = propagate(tubes_plan.inputs, tubes_plan.mixtures)
    prediction = prediction_from(result)
    # design_plan fills its prediction from the same propagation.
    assert tubes_plan.prediction == prediction
    assert prediction.K_bias_from_assumption == pytest.approx(prediction.K / 98.0 - 1.0)
    low, high = prediction.K_ci95
    assert (high - low) / 2 == pytest.approx(COVERAGE_FACTOR_95 * prediction.u_K)
    assert set(prediction.absorbance_ci95) == {m.id for m in tubes_plan.mixtures}
    assert len(prediction.K_per_test_ci95) == len(tubes_plan.by_role("test"))
    assert prediction.u_epsilon_intercept is not None


def test_plan_without_tests_is_refused(tubes_plan):
    mixtures = [m for m in tubes_plan.mixtures if m.role != "test"]
    with pytest.raises(InvalidInputError, match="mixtures"):
        propagate(tubes_plan.inputs, mixtures)


def test_generated_sensitivities_are_current():
    # The run-time sensitivity functions are printed by sympy from the symbolic models; if a
    # model changes, this fails until planner/predict/_sensitivities.py is regenerated.
    from pathlib import Path

    import planner.predict._sensitivities as generated
    from planner.predict.uncertainty import generated_source

    assert Path(generated.__file__).read_text(encoding="utf-8") == generated_source()
