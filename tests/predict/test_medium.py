"""The ionic medium: each mixture's constant in its own medium, and a constant medium by design."""

from __future__ import annotations

import math

import pytest

from planner.errors import PlanFileError
from planner.pipeline import design_plan
from planner.planfile import load_plan, parse_plan
from planner.predict.uncertainty import propagate
from planner.verify import verify_saved
from tests.plans import plan_of

from .conftest import DEFAULT, TUBES

CONSTANT = DEFAULT  # the embedded default sets design.ionic_medium


@pytest.fixture(scope="module")
def constant_plan():
    return plan_of(CONSTANT)


def test_every_mixture_has_the_medium_s_ionic_strength(constant_plan) -> None:
    # The done criterion: with design.ionic_medium every mixture has that ionic strength
    # within 1 % (the complex and the free ions move it by a few 1e-4 mol/L).
    for mixture in constant_plan.mixtures:
        assert mixture.ionic_strength_M == pytest.approx(3.0, rel=0.01)
    statuses = {c.name: c.status for c in constant_plan.checks}
    assert statuses["ionic-strength"] == "pass"
    assert "fail" not in statuses.values()


def test_prep_sheet_weighs_the_salt(constant_plan) -> None:
    # NaNO3: 22.98977 + 14.0067 + 3 * 15.9994 = 84.9947 g/mol (IUPAC standard atomic weights,
    # from memory). The acid stock (H+ 0.5, NO3- 0.5; I = 0.5) needs 2.5 mol/L of the salt:
    # 2.5 * 84.9947 = 212.49 g per litre of flask.
    prep = {p.stock: p for p in constant_plan.preparations}
    acid = prep["acid"]
    assert acid.salt_formula == "NaNO3"
    assert acid.salt_M == pytest.approx(2.5, rel=1e-12)
    assert acid.salt_mass_g == pytest.approx(212.49 * acid.flask_mL / 1000.0, rel=1e-4)
    # The strong iron stock: Fe3+ 0.40, H+ 0.5, NO3- 1.7 has I = (3.6 + 0.5 + 1.7)/2 = 2.9.
    assert prep["iron-strong"].salt_M == pytest.approx(0.1, rel=1e-9)


def test_bench_constant_is_the_constant_medium_s(constant_plan) -> None:
    # K = 98 at I = 0.5 moved to 3.0 by SIT (joined to Davies at 0.5), dz2 = 6, d_eps = 0:
    # D(3) = 0.509 sqrt(3)/(1 + 1.5 sqrt(3)) = 0.245030, D(0.5) = 0.174661, so
    # log10 K falls by 6 * 0.070369 = 0.422214: K = 98 * 10^-0.422214 = 37.07 (by hand).
    assert constant_plan.global_fit is not None
    k_by_hand = 98.0 * 10.0 ** (-0.422214)
    fitted = constant_plan.global_fit.K
    assert fitted == pytest.approx(k_by_hand, rel=2e-4)
    assert k_by_hand == pytest.approx(37.07, abs=0.01)
    # Every mixture shares the medium, so the medium adds no bias of its own.
    medium = propagate(constant_plan.inputs, constant_plan.mixtures).medium
    assert medium is not None
    # Exactly: a share computed from round-off would be printed as a number that means nothing.
    assert medium.K_bias_all_bound == 0.0
    assert medium.K_bias_global_fit == 0.0


def test_stocks_above_the_target_are_refused() -> None:
    text = CONSTANT.read_text(encoding="utf-8").replace(
        "ionic_strength_M = 3.0 }", "ionic_strength_M = 2.5 }"
    )
    with pytest.raises(PlanFileError) as info:
        parse_plan(text)
    assert info.value.field == "design.ionic_medium.ionic_strength_M"
    assert "already has ionic strength 2.9 mol/L" in str(info.value)


def test_tubes_plan_s_medium_share_of_the_bias() -> None:
    # The default's shelf without its constant medium: the mixtures run from I = 0.52 to 1.89
    # mol/L against constants for 0.5. The blank's ions: by hand its iron-strong and acid
    # stocks give I = 1.892 mol/L, where
    # D(1.892) = 0.509 * 1.375500/3.063250 = 0.228560, so K = 98 * 10^(-6 (0.228560 -
    # 0.174661)) = 98 * 10^-0.323394 = 46.54 (SIT branch, d_eps = 0).
    inputs = load_plan(TUBES)
    plan = design_plan(inputs)
    medium = propagate(inputs, plan.mixtures).medium
    assert medium is not None
    blank = next(i for i, m in enumerate(plan.mixtures) if m.role == "blank")
    assert medium.ionic_strength_M[blank] == pytest.approx(1.892, abs=1e-3)
    assert medium.K_in_medium[blank] == pytest.approx(98.0 * 10.0 ** (-0.323394), rel=2e-3)
    # The standards sit in a stronger medium than the tests, so the class's K moves: the
    # medium's share is shown apart, of the size the issue reports (a few per cent).
    assert 0.0 < medium.K_bias_all_bound < 0.15
    assert math.isfinite(medium.K_bias_global_fit)


def test_bias_split_into_causes() -> None:
    # The default's shelf without its constant medium, the room at 20 °C: the temperature's
    # share is van 't Hoff's
    # 102.1304 / 98 - 1 = 0.042147 (hand value, tests/chem/test_thermodynamics.py); the first
    # three shares multiply to the all-bound K's bias on noise-free readings; the default's
    # only other product does not absorb (epsilon 0), so the absorbing reagents add nothing.
    text = TUBES.read_text(encoding="utf-8").replace(
        "[session]\n", "[session]\ntemperature_C = 20\n"
    )
    inputs = parse_plan(text)
    plan = design_plan(inputs)
    result = propagate(inputs, plan.mixtures)
    causes = result.bias_causes
    assert causes is not None
    assert causes.temperature == pytest.approx(102.1304 / 98.0 - 1.0, rel=1e-4)
    assert causes.absorbing_reagents == 0.0
    assert causes.stray_light < 0  # stray light flattens the high readings of the standards
    product = (1 + causes.all_bound_assumption) * (1 + causes.absorbing_reagents)
    product *= 1 + causes.stray_light
    assert product - 1 == pytest.approx(result.K_bias_from_assumption, rel=1e-9)
    assert causes.ionic_medium == result.medium.K_bias_all_bound


def test_every_screen_states_the_constant_at_the_benches(constant_plan) -> None:
    # In the default's constant medium the class should find K = 98 * 10^-0.422214 = 37.07
    # (hand value above), not the plan file's 98 at 0.5 mol/L: the terminal, the answer key
    # and the assumption check all measure against it (the check once said -42 % where the
    # prediction said +52 %, one against 98 and the other against 37).
    import re

    from rich.console import Console

    from planner.report.sheets import answer_key_md
    from planner.report.terminal import render_plan

    k_bench = 98.0 * 10.0 ** (-0.422214)
    assert constant_plan.K_at_benches == pytest.approx(k_bench, rel=2e-4)
    console = Console(width=200, record=True, color_system=None)
    console.print(render_plan(constant_plan))
    text = console.export_text()
    assert "true K at the benches 37.07 L/mol, from the plan file's 98.00" in text
    key = answer_key_md(constant_plan, date="2026-01-01")
    rows = [line for line in key.splitlines() if line.startswith("| K of FeSCN2+")]
    # Both analyses' rows, the global fit's first: the last cell is the K the plan assumes.
    assert [row.rsplit("|", 2)[1].strip() for row in rows] == ["37.07", "37.07"]
    assumption = next(c for c in constant_plan.checks if c.name == "limiting-reagent-assumption")
    stated = re.search(r"errs by about ([+-][0-9.]+) %", assumption.detail)
    assert stated is not None, assumption.detail
    assert constant_plan.prediction is not None
    # The check leaves out the blank and stray light (a -0.08 % share here): within 1 %.
    assert float(stated.group(1)) / 100 == pytest.approx(
        constant_plan.prediction.K_bias_from_assumption, abs=0.01
    )


def test_stocks_made_as_the_prep_sheet_says_reach_the_medium(constant_plan) -> None:
    # Made as the sheet says: each stock up to the mark in the diluent before its salt (H+ 0.5,
    # NO3- 0.5 mol/L, as the plan file lists it), with its own weighed salt. Its ionic
    # strength, I = 1/2 sum c z^2 by hand, must be the medium's 3.0 mol/L; the diluent's
    # salted flasks hold only the benches' share (the rest makes up the other stocks).
    prep = {p.stock: p for p in constant_plan.preparations}
    for stock in constant_plan.inputs.stocks:
        if stock.id not in prep:
            continue
        assert "before its salt" in prep[stock.id].medium or stock.diluent
        made = dict(stock.plan_contains_M)
        made["Na+"] = made.get("Na+", 0.0) + prep[stock.id].salt_M
        made["NO3-"] = made.get("NO3-", 0.0) + prep[stock.id].salt_M
        charges = {"Fe3+": 3, "H+": 1, "NO3-": -1, "Na+": 1, "SCN-": -1, "K+": 1}
        strength = 0.5 * sum(c * charges[ion] ** 2 for ion, c in made.items())
        assert strength == pytest.approx(3.0, rel=1e-9), stock.id
    totals = constant_plan.totals
    benches_share = totals.to_prepare["acid"] - totals.for_stocks["acid"]
    assert prep["acid"].flask_mL * prep["acid"].flasks >= benches_share
    assert prep["acid"].flask_mL * (prep["acid"].flasks - 1) < benches_share


def test_a_dilution_in_the_medium_weighs_only_the_salt_its_aliquot_lacks() -> None:
    # iron-dilute without a solid is made from iron-strong (a = 0.04/0.40 = 0.1 of it): the
    # aliquot brings 0.1 * 0.1 = 0.01 mol/L of NaNO3, so the flask takes 2.26 - 0.01 = 2.25
    # mol/L (the stocks' salts: iron-strong 3.0 - 2.9 = 0.1, iron-dilute 3.0 - 0.74 = 2.26).
    text = DEFAULT.read_text(encoding="utf-8")
    head, _, rest = text.partition('id = "iron-dilute"')
    rest = rest.replace('solid = { formula = "Fe(NO3)3(H2O)9", purity = 0.985 }\n', "", 1)
    plan = design_plan(parse_plan(head + 'id = "iron-dilute"' + rest))
    prep = {p.stock: p for p in plan.preparations}
    assert prep["iron-dilute"].source == "iron-strong"
    assert prep["iron-dilute"].salt_M == pytest.approx(2.25, rel=1e-9)
    assert prep["iron-strong"].salt_M == pytest.approx(0.1, rel=1e-9)
    # planner verify re-derives the same salt on its own (docs/methods.md section 13).
    assert {c.name: c.status for c in verify_saved(plan)}["preparation"] == "pass"


def _with_slope(path, slope: float) -> str:
    """The plan file with an epsilon_ionic_slope on FeSCN2+ (the species with an enthalpy)."""
    text = path.read_text(encoding="utf-8")
    marked = text.replace(
        "enthalpy_kJ_mol = -6", f"epsilon_ionic_slope = {slope}\nenthalpy_kJ_mol = -6", 1
    )
    assert marked != text
    return marked


def test_epsilon_moves_to_the_constant_medium_where_its_slope_is_given() -> None:
    # eps = 4700 at 0.5 mol/L with a slope of -0.05 per mol/L: at the default's 3.0 mol/L,
    # 4700 (1 - 0.05 x 2.5) = 4112.5 (by hand). The plan file keeps 4700; the global fit
    # returns the moved value from noise-free readings, and verify agrees.
    from planner.planfile import plan_from_mapping, plan_to_mapping
    from planner.report.plan_json import plan_json
    from planner.resultfile import parse_result

    inputs = parse_plan(_with_slope(DEFAULT, -0.05))
    assert inputs.measured_species.epsilon == pytest.approx(4112.5, rel=1e-12)
    written = plan_to_mapping(inputs)["reaction"]["species"][0]
    assert (written["epsilon"], written["epsilon_ionic_slope"]) == (4700.0, -0.05)
    assert plan_from_mapping(plan_to_mapping(inputs)) == inputs  # moved once, not twice
    plan = design_plan(inputs)
    assert plan.global_fit is not None
    assert plan.global_fit.epsilon == pytest.approx(4112.5, rel=1e-9)
    saved = parse_result(plan_json(plan), source="plan.json")
    assert [c.name for c in verify_saved(saved) if c.status != "pass"] == []


def test_epsilon_in_each_mixture_s_medium_enters_the_medium_s_share() -> None:
    # Without a constant medium each mixture keeps its own eps: the tubes plan's blank at
    # I = 1.892 mol/L (hand value above) has 4700 (1 + 0.05 x 1.392) = 5027.1 with a slope
    # of +0.05. The standards sit in the stronger medium, so their eps, and the all-bound
    # analysis's eps from them, come out higher, and the K of the tests lower: the medium's
    # share falls below its value without the slope.
    from planner.predict.medium import _epsilon_rows, initial_ionic_strength_M

    shares = {}
    for slope in (0.0, 0.05):
        inputs = parse_plan(_with_slope(TUBES, slope))
        plan = design_plan(inputs)
        medium = propagate(inputs, plan.mixtures).medium
        assert medium is not None
        shares[slope] = medium.K_bias_all_bound
        if slope:
            rows = _epsilon_rows(inputs, initial_ionic_strength_M(plan.mixtures))
            blank = next(i for i, m in enumerate(plan.mixtures) if m.role == "blank")
            assert rows[blank, inputs.measured] == pytest.approx(5027.1, abs=0.2)
    assert shares[0.05] < shares[0.0]


def test_a_slope_that_takes_epsilon_below_zero_in_the_medium_is_refused() -> None:
    # 1 - 0.5 x (3.0 - 0.5) = -0.25: no absorptivity is negative.
    with pytest.raises(PlanFileError) as info:
        parse_plan(_with_slope(DEFAULT, -0.5))
    assert info.value.field == "reaction.species[0].epsilon_ionic_slope"


def test_a_pure_water_diluent_is_salted_for_the_benches_only() -> None:
    # A diluent the plan file lists with nothing dissolved: the stocks are made up in plain
    # water (the label says so), and the water for the benches takes 3.0 mol/L of NaNO3, as
    # planner verify re-derives (an empty composition once read as "no plan file value" and
    # took the salted one, so verify recomputed no salt and failed the preparation).
    text = DEFAULT.read_text(encoding="utf-8").replace(
        'contains_M = { "H+" = 0.5, "NO3-" = 0.5 }\ndiluent = true',
        "contains_M = {}\ndiluent = true",
    )
    plan = design_plan(parse_plan(text))
    prep = {p.stock: p for p in plan.preparations}
    assert prep["acid"].salt_M == pytest.approx(3.0, rel=1e-12)
    assert prep["iron-strong"].medium == "acid before its salt (nothing dissolved)"
    assert {c.name: c.status for c in verify_saved(plan)}["preparation"] == "pass"


def test_balanced_charges_move_no_K_and_the_spread_passes() -> None:
    # An invented shelf: Ni2+ with a neutral ligand Q into NiQ2+, stocks of unequal salt.
    # By hand, delta z^2 = 1 * 2^2 + 1 * 0^2 - 2^2 = 0, so Davies (and SIT with no
    # coefficient) moves no constant: the medium's share of the bias is exactly 0 (it had
    # printed +4.4e-14 %, the round-off of two fits), and a wide spread of ionic strength
    # passes the check, saying why, where a K that moves with it would warn.
    text = """
title = "Nickel(II) and a neutral ligand (invented)"
[reaction]
ionic_strength_M = 0.3
components = ["Ni2+", "Q"]
[[reaction.species]]
name = "NiQ2+"
formula = { "Ni2+" = 1, "Q" = 1 }
K = 450
epsilon = 85
[instrument]
wavelength_nm = 590
absorbance_window = [0.1, 1.5]
absorbance_sd = 0.002
[[stocks]]
id = "nickel"
contains_M = { "Ni2+" = 0.20, "NO3-" = 0.40 }
[[stocks]]
id = "ligand"
contains_M = { "Q" = 1.0 }
[[stocks]]
id = "water"
contains_M = {}
diluent = true
[[glassware]]
kind = "buret"
volume_mL = 50
count = 2
[[glassware]]
kind = "volumetric-flask"
volume_mL = 50
count = 12
[design]
standards = 4
tests = 5
limiting = "Ni2+"
vessel = "flask-50"
"""
    inputs = parse_plan(text)
    plan = design_plan(inputs)
    result = propagate(inputs, plan.mixtures)
    assert result.medium is not None
    strengths = [
        i
        for i, m in zip(result.medium.ionic_strength_M, plan.mixtures, strict=True)
        if m.role != "blank"
    ]
    assert (max(strengths) - min(strengths)) / max(strengths) > 0.5  # a wide spread
    assert all(k == pytest.approx(450.0, rel=1e-12) for k in result.medium.K_in_medium)
    assert result.medium.K_bias_all_bound == 0.0
    assert result.bias_causes is not None
    assert result.bias_causes.ionic_medium == 0.0
    check = next(c for c in plan.checks if c.name == "ionic-strength")
    assert check.status == "pass"
    assert "moves no K" in check.detail
    # The same shelf with a charged ligand (delta z^2 = 1 * 4 + 1 * 1 - 1 = 4) warns.
    charged = text.replace('"Q"', '"Q-"').replace("NiQ2+", "NiQ+")
    check = next(c for c in design_plan(parse_plan(charged)).checks if c.name == "ionic-strength")
    assert check.status == "warn"


def test_a_salted_source_used_only_to_make_a_dilution_still_gets_its_recipe() -> None:
    # A stock with a solid that the benches never use but a dilution is made from (here
    # iron-strong, as if the design had used only iron-dilute) is prepared whole, with its
    # salt: only the diluent's share that makes up other stocks stays unsalted. Its mass by
    # hand: m = c V M / purity = 0.40 mol/L x 0.100 L x 403.998 g/mol / 0.985 = 16.406 g, with
    # M(Fe(NO3)3(H2O)9) = 55.845 + 3 (14.007 + 3 x 15.999) + 9 (2 x 1.008 + 15.999)
    # (IUPAC 2021 abridged values).
    from dataclasses import replace

    from planner.design.logistics import preparations

    text = DEFAULT.read_text(encoding="utf-8")
    head, _, rest = text.partition('id = "iron-dilute"')
    rest = rest.replace('solid = { formula = "Fe(NO3)3(H2O)9", purity = 0.985 }\n', "", 1)
    inputs = parse_plan(head + 'id = "iron-dilute"' + rest)
    totals = design_plan(inputs).totals
    aliquots = totals.for_stocks["iron-strong"]
    assert 0 < aliquots <= 100.0  # one 100 mL flask holds what the dilutions take
    only_for_stocks = replace(
        totals,
        per_bench={**totals.per_bench, "iron-strong": 0.0},
        to_prepare={**totals.to_prepare, "iron-strong": aliquots},
    )
    prep = {p.stock: p for p in preparations(inputs, only_for_stocks)}
    strong = prep["iron-strong"]
    assert (strong.flasks, strong.flask_mL) == (1, 100.0)
    molar_mass = 55.845 + 3 * (14.007 + 3 * 15.999) + 9 * (2 * 1.008 + 15.999)
    assert strong.mass_g == pytest.approx(0.40 * 0.100 * molar_mass / 0.985, rel=1e-9)
    assert strong.salt_M == pytest.approx(0.1, rel=1e-9)  # 3.0 - its own 2.9 mol/L
