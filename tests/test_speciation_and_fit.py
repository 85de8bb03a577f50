"""What a plan says when its tests cannot tell K, and when its standards form another product.

An invented shelf: copper(II) with an amino-acid-like ligand G- (our own round constants,
K1 = 10^8.2 L/mol and beta2 = 10^15.1 (mol/L)^-2, not literature values), read with a cheap
colorimeter in 10 mL tubes. At these millimolar concentrations the complex is far too strong
for a spectrophotometric K: every test binds essentially all of one reagent, so its reading
follows the stoichiometry. And the plan file measures CuG+ while copper is limiting, so the
standards, with the ligand in excess, form CuG2 instead.
"""

from __future__ import annotations

import re

import pytest
from rich.console import Console

from planner.pipeline import design_plan
from planner.planfile import parse_plan

STRONG = """
title = "Copper(II) with ligand G (invented), colorimeter, tubes"
[reaction]
ionic_strength_M = 0.1
components = ["Cu2+", "G-"]
[[reaction.species]]
name = "CuG+"
formula = { "Cu2+" = 1, "G-" = 1 }
log_beta = 8.2
epsilon = 45
[[reaction.species]]
name = "CuG2"
formula = { "Cu2+" = 1, "G-" = 2 }
log_beta = 15.1
epsilon = 60
[instrument]
wavelength_nm = 630
absorbance_window = [0.05, 1.2]
absorbance_sd = 0.01
[[stocks]]
id = "copper"
contains_M = { "Cu2+" = 0.05, "NO3-" = 0.10 }
relative_uncertainty = 0.005
[[stocks]]
id = "ligand"
contains_M = { "G-" = 0.10, "Na+" = 0.10 }
relative_uncertainty = 0.005
[[stocks]]
id = "water"
contains_M = {}
diluent = true
[[glassware]]
kind = "graduated-pipette"
volume_mL = 5
count = 3
[design]
standards = 4
tests = 4
limiting = "Cu2+"
measured_species = "CuG+"
total_volume_mL = 10
"""


@pytest.fixture(scope="module")
def strong():
    return design_plan(parse_plan(STRONG))


def _check(plan, name):
    return next(c for c in plan.checks if c.name == name)


def test_a_K_too_large_for_the_concentrations_is_named_with_its_fix(strong):
    # Every test binds over 99 % of one reagent (checked here from the plan's own speciation),
    # so the global fit cannot tell K and the check says why: K is too large for these
    # concentrations; 1/K = 10^-8.2 = 6.3e-9 mol/L (hand value) is where K would show.
    for mixture in strong.by_role("test"):
        shares = [mixture.equilibrium_M[c] / mixture.initial_M[c] for c in ("Cu2+", "G-")]
        assert min(shares) < 0.01
    check = _check(strong, "prediction-meaningful")
    assert check.status == "fail"
    assert "too large to measure at these concentrations" in check.detail
    assert "1/K = 6.3e-09 mol/L" in check.detail
    assert strong.global_fit is None


def test_a_bias_of_a_factor_of_a_million_is_said_as_a_factor_not_split_by_cause(strong):
    # The all-bound K of this plan is about 205 L/mol against K = 10^8.2: its bias "-100 %"
    # hides a factor of about 1.3e-6 (205 / 1.585e8, by hand). The sheets give the factor,
    # and give no split by cause: shares such as -100 % and +2.5e7 % multiply correctly to
    # that factor and mean nothing to a reader.
    from planner.report.bench_text import bias_line
    from planner.report.terminal import render_plan

    prediction = strong.prediction
    assert prediction is not None
    factor = 1.0 + prediction.K_bias_from_assumption
    assert factor == pytest.approx(prediction.K / 10**8.2, rel=0.05)
    assert factor < 1e-5
    line = bias_line(strong.uncertainty.bias_causes)
    assert "(a factor of 1.3e-6)" in line
    assert "too large to split by cause" in line
    assert "absorbing reagents" not in line
    console = Console(width=200, record=True)
    console.print(render_plan(strong))
    text = console.export_text()
    assert "global fit: withheld" in text
    assert "+2.5e7" not in text
    assert "(a factor of 1.3e-6)" in text
    # The verify check's own estimate says its factor too.
    check = _check(strong, "limiting-reagent-assumption")
    assert re.search(r"-100\.0 % \(a factor of [0-9.]+e-[0-9]+\)", check.detail)


def test_moderate_biases_stay_percentages():
    # +63.4 % (the default plan's all-bound K) is a factor of 1.634: no factor is added; a
    # factor of exactly ten is still a percentage, past it the factor follows.
    from planner.report._format import relative_bias

    assert relative_bias(0.634) == "+63.4 %"
    assert relative_bias(-0.9) == "-90.0 %"
    assert relative_bias(9.0) == "+900 %"
    assert relative_bias(-0.95) == "-95.0 % (a factor of 0.050)"
    assert relative_bias(20.0) == "+2000 % (a factor of 21)"


def test_standards_forming_another_product_than_the_measured_one_warn(strong):
    # The check judges the product the plan file measures (CuG+), not the most absorbing one
    # (CuG2, which it used to pick and then pass). With CuG2 holding all the copper, the
    # all-bound calibration reads eps(CuG2) as eps(CuG+): 60 / 45 - 1 = +33 % (hand value).
    check = _check(strong, "product-speciation")
    assert check.status == "warn"
    assert "products other than CuG+" in check.detail
    assert "off by up to +33 %" in check.detail


def test_a_non_absorbing_second_product_reads_eps_low():
    # The same shelf with CuG2 colourless: the all-bound eps is the share of copper in CuG+
    # times eps(CuG+), so it is low by exactly the share the other product holds (by hand:
    # eps_read / eps - 1 = (1 - other) - 1 = -other).
    text = STRONG.replace("epsilon = 60", "epsilon = 0")
    check = _check(design_plan(parse_plan(text)), "product-speciation")
    assert check.status == "warn"
    other = re.search(r"up to ([0-9.]+) % of the limiting reagent", check.detail)
    off = re.search(r"off by up to ([+-][0-9]+) %", check.detail)
    assert other is not None
    assert off is not None
    assert int(off.group(1)) == -round(float(other.group(1)))
