"""Prep-room logistics: volumes per bench, section and session, volumes to prepare, flasks and
masses of solid, against the arithmetic written out by hand.

Outside references:

- molar masses from the periodictable package (an independent library of standard atomic
  weights; the planner also reads it, so the hand sums of the IUPAC CIAAW standard atomic
  weights 2021, abridged (Prohaska et al., Pure Appl. Chem. 94 (2022) 573-600), are written
  beside them as a second check);
- the mass of solid for one flask, m = c V M / purity (amount of substance c V of the ion the
  solid provides, one formula unit per ion; Harris, Quantitative Chemical Analysis, 9th ed.,
  2016, chapter 1, from memory);
- the documented bookkeeping (docs/plan-file.md, "[session]"; DESIGN.md contract detail 7):
  session = per_bench x benches_per_section x sections x replicates, and
  to_prepare = session x (1 + margin) + dead_volume_mL x sections x benches_per_section;
  the flask is the smallest of the prep room's 100, 250, 500, 1000 and 2000 mL volumetric
  flasks that holds the volume to prepare, or enough 2000 mL flasks (planner/design/
  logistics.py, ISO 1042 nominal capacities).
"""

from __future__ import annotations

import dataclasses
import math
import tomllib
from pathlib import Path

import periodictable
import pytest

from planner.design.logistics import preparations, stock_totals
from planner.planfile import plan_from_mapping
from planner.result import Addition, Mixture, Totals
from tests.plans import designed

ROOT = Path(__file__).resolve().parents[2]
DEFAULT = ROOT / "planner" / "data" / "default.toml"

# The prep room's volumetric flasks [mL] (ISO 1042 nominal capacities, from memory).
FLASKS_mL = (100.0, 250.0, 500.0, 1000.0, 2000.0)

# Each solid as the plan files write it -> the same formula in periodictable's notation
# (hydrate water as a parenthesised group).
PERIODICTABLE_FORMULA = {
    "Fe(NO3)3(H2O)9": "Fe(NO3)3(H2O)9",
    "Fe(NO3)3·9H2O": "Fe(NO3)3(H2O)9",
    "KSCN": "KSCN",
    "NaSCN": "NaSCN",
    "Cu(ClO4)2(H2O)6": "Cu(ClO4)2(H2O)6",
}

# Hand sums of the CIAAW 2021 abridged standard atomic weights [g/mol]:
# H 1.008, C 12.011, N 14.007, O 15.999, Na 22.990, S 32.06, Cl 35.45, K 39.098,
# Fe 55.845, Cu 63.546.
HAND_MOLAR_MASS = {
    # 55.845 + 3 x (14.007 + 3 x 15.999) + 9 x (2 x 1.008 + 15.999)
    # = 55.845 + 186.012 + 162.135 = 403.992
    "Fe(NO3)3(H2O)9": 403.992,
    "Fe(NO3)3·9H2O": 403.992,
    # 39.098 + 32.06 + 12.011 + 14.007 = 97.176
    "KSCN": 97.176,
    # 22.990 + 32.06 + 12.011 + 14.007 = 81.068
    "NaSCN": 81.068,
    # 63.546 + 2 x (35.45 + 4 x 15.999) + 6 x 18.015 = 63.546 + 198.892 + 108.090 = 370.528
    "Cu(ClO4)2(H2O)6": 370.528,
}


def _flask(volume_mL: float) -> tuple[float, int]:
    """Smallest flask holding the volume, else enough of the largest (the documented rule)."""
    for size in FLASKS_mL:
        if size >= volume_mL:
            return size, 1
    return FLASKS_mL[-1], math.ceil(volume_mL / FLASKS_mL[-1])


def _molar_mass(formula: str) -> float:
    return float(periodictable.formula(PERIODICTABLE_FORMULA[formula]).mass)


def test_molar_masses_agree_with_the_hand_sums():
    # Abridged weights are rounded to about five figures: 0.01 g/mol.
    for formula, hand in HAND_MOLAR_MASS.items():
        assert _molar_mass(formula) == pytest.approx(hand, abs=0.01)


# ---------------------------------------------------------------------------------------------
# A designed plan: the default scenario and two recipes
# ---------------------------------------------------------------------------------------------

PLANS = [
    DEFAULT,
    ROOT / "recipes" / "copper-ligand-excess.toml",  # replicates = 2, solid names its ion
    ROOT / "recipes" / "iron-thiocyanate-flasks.toml",  # flasks, dot hydrate, NaSCN
]


def _designed(path: Path):
    return designed(path)


@pytest.fixture(scope="module", params=PLANS, ids=lambda p: p.stem)
def planned(request):
    return _designed(request.param)


def test_volumes_per_bench_section_session_and_to_prepare(planned):
    # The default plan, worked by hand with its own numbers (sections 3, benches 10,
    # replicates 1, margin 0.15, dead volume 5 mL); the design gave at the time of writing:
    #   iron-strong per bench = 6 mixtures x 6.7 mL (blank and five standards) = 40.2 mL
    #   sets = 3 x 10 x 1 = 30; session = 40.2 x 30 = 1206 mL
    #   containers = 3 x 10 = 30; dead volume = 5 x 30 = 150 mL
    #   to prepare = 1206 x 1.15 + 150 = 1386.9 + 150 = 1536.9 mL
    # and likewise iron-dilute 8.7 -> 261 -> 450.15 mL, thiocyanate 48.5 -> 1455 -> 1823.25 mL,
    # acid 12.6 -> 378 -> 584.7 mL, + the medium of the three stocks made from solids. The test
    # redoes this for every stock of every plan from the plan's own mixtures, so it holds
    # whatever the design chooses.
    inputs, plan = planned
    session = inputs.session
    sets = session.sections * session.benches_per_section * session.replicates
    containers = session.sections * session.benches_per_section
    totals = plan.totals
    assert totals.dead_volume_mL == session.dead_volume_mL
    for stock in inputs.stocks:
        per_bench = sum(
            a.volume_mL for m in plan.mixtures for a in m.additions if a.stock == stock.id
        )
        assert totals.per_bench[stock.id] == pytest.approx(per_bench, rel=1e-12)
        assert totals.per_section[stock.id] == pytest.approx(
            per_bench * session.benches_per_section * session.replicates, rel=1e-12
        )
        assert totals.session[stock.id] == pytest.approx(per_bench * sets, rel=1e-12)
        needed = (
            per_bench * sets * (1 + session.margin) + session.dead_volume_mL * containers
            if per_bench > 0
            else 0.0
        )
        # + what making the other stocks takes of it (pinned by hand in the tests below).
        needed += totals.for_stocks.get(stock.id, 0.0)
        assert totals.to_prepare[stock.id] == pytest.approx(needed, rel=1e-12)
    # The medium fills every flask made from a solid or by dilution, less the aliquots.
    made = [p for p in plan.preparations if p.solid_formula or p.source]
    if inputs.diluent is not None and made:
        medium = sum(p.flasks * (p.flask_mL - p.aliquot_mL) for p in made)
        assert totals.for_stocks[inputs.diluent.id] == pytest.approx(medium, rel=1e-12)


def test_flasks_and_masses_of_solid(planned):
    # The default plan by hand (numbers at the time of writing):
    #   iron-strong 1536.9 mL -> one 2000 mL flask; m = 0.40 mol/L x 2.000 L x 403.992 g/mol
    #     / 0.985 = 328.12 g of Fe(NO3)3(H2O)9
    #   iron-dilute 450.15 mL -> one 500 mL flask; m = 0.040 x 0.500 x 403.992 / 0.985 = 8.2029 g
    #   thiocyanate 1823.25 mL -> one 2000 mL flask; m = 6.0e-4 x 2.000 x 97.176 / 0.99
    #     = 0.11779 g of KSCN
    #   acid 584.7 + 2000 + 500 + 2000 (their medium) = 5084.7 mL -> three 2000 mL flasks, no
    #   solid.
    inputs, plan = planned
    made = {p.stock: p for p in plan.preparations}
    used = [s for s in inputs.stocks if plan.totals.to_prepare[s.id] > 0]
    assert list(made) == [s.id for s in used]  # one per used stock, in plan order
    components = inputs.reaction.components
    for stock in used:
        prep = made[stock.id]
        to_prepare = plan.totals.to_prepare[stock.id]
        if stock.medium_salt_M > 0:
            # A constant ionic medium: what makes up the other stocks is the diluent before
            # its salt, so only the benches' share is flasked (and salted) as this stock.
            to_prepare -= plan.totals.for_stocks.get(stock.id, 0.0)
        assert (prep.flask_mL, prep.flasks) == _flask(to_prepare)
        assert prep.flask_mL * prep.flasks >= to_prepare
        if stock.solid is None:
            assert prep.mass_g == 0.0
            assert prep.solid_formula == ""
            continue
        # The ion the solid provides: as the plan names it, else the stock's first component.
        provides = stock.solid.provides or next(i for i in stock.contains_M if i in components)
        assert prep.provides == provides
        concentration = stock.contains_M[provides]
        molar_mass = _molar_mass(stock.solid.formula)
        assert prep.molar_mass_g_per_mol == pytest.approx(molar_mass, rel=1e-9)
        expected = concentration * (prep.flask_mL / 1000.0) * molar_mass / stock.solid.purity
        assert prep.mass_g == pytest.approx(expected, rel=1e-9)


def test_default_plan_masses_by_hand():
    # The default plan's solids in numbers. The flask sizes follow the design's volumes, but
    # per litre of flask the masses are fixed by the stock alone:
    # iron-strong 0.40 x 403.992 / 0.985 = 164.058 g/L; iron-dilute 0.040 x 403.992 / 0.985
    # = 16.4058 g/L; thiocyanate 6.0e-4 x 97.176 / 0.99 = 0.058894 g/L.
    per_litre = {"iron-strong": 164.058, "iron-dilute": 16.4058, "thiocyanate": 0.058894}
    _, plan = _designed(DEFAULT)
    made = {p.stock: p for p in plan.preparations}
    for stock, grams_per_L in per_litre.items():
        prep = made[stock]
        assert prep.mass_g / (prep.flask_mL / 1000.0) == pytest.approx(grams_per_L, rel=1e-4)


# ---------------------------------------------------------------------------------------------
# Hand-typed mixtures: every number pinned
# ---------------------------------------------------------------------------------------------


def _mixture(mixture_id: str, role: str, volumes: dict[str, float]) -> Mixture:
    additions = tuple(
        Addition(stock=s, volume_mL=v, devices=("buret-25mL",), order=n)
        for n, (s, v) in enumerate(volumes.items(), start=1)
    )
    return Mixture(
        id=mixture_id,
        role=role,
        total_volume_mL=10.0,
        additions=additions,
        initial_M={},
        equilibrium_M={},
        absorbance=0.0,
        u_absorbance=0.0,
        bound_fraction=0.0,
        ionic_strength_M=0.0,
    )


# One bench's set in 10 mL tubes (invented volumes); iron-dilute is not used.
BENCH = (
    _mixture("B1", "blank", {"acid": 4.0, "iron-strong": 6.0}),
    _mixture("S1", "standard", {"acid": 2.5, "iron-strong": 6.0, "thiocyanate": 1.5}),
    _mixture("S2", "standard", {"acid": 1.0, "iron-strong": 6.0, "thiocyanate": 3.0}),
    _mixture("T1", "test", {"acid": 2.5, "iron-strong": 2.5, "thiocyanate": 5.0}),
    _mixture("T2", "test", {"acid": 1.0, "iron-strong": 1.5, "thiocyanate": 7.5}),
)


@pytest.fixture(scope="module")
def big_session():
    # The default plan's stocks, without its constant medium (no salt), with an invented
    # larger session.
    data = tomllib.loads((ROOT / "recipes" / "iron-thiocyanate-tubes.toml").read_text("utf-8"))
    data["session"] = {
        "sections": 4,
        "benches_per_section": 10,
        "replicates": 3,
        "margin": 0.10,
        "dead_volume_mL": 4.0,
    }
    return plan_from_mapping(data)


def test_hand_typed_bench_totals(big_session):
    totals = stock_totals(big_session, BENCH)
    # per bench: iron-strong 6.0 + 6.0 + 6.0 + 2.5 + 1.5 = 22.0 mL
    #            thiocyanate 1.5 + 3.0 + 5.0 + 7.5 = 17.0 mL
    #            acid 4.0 + 2.5 + 1.0 + 2.5 + 1.0 = 11.0 mL; iron-dilute 0
    assert totals.per_bench == pytest.approx(
        {"iron-strong": 22.0, "iron-dilute": 0.0, "thiocyanate": 17.0, "acid": 11.0}
    )
    # per section = per bench x 10 benches x 3 replicates = x 30: 660, 0, 510, 330 mL
    assert totals.per_section == pytest.approx(
        {"iron-strong": 660.0, "iron-dilute": 0.0, "thiocyanate": 510.0, "acid": 330.0}
    )
    # session = per bench x 4 sections x 10 benches x 3 replicates = x 120:
    # 22 x 120 = 2640, 17 x 120 = 2040, 11 x 120 = 1320 mL
    assert totals.session == pytest.approx(
        {"iron-strong": 2640.0, "iron-dilute": 0.0, "thiocyanate": 2040.0, "acid": 1320.0}
    )
    # to prepare = session x 1.10 + 4 mL x 4 sections x 10 benches (160 mL), used stocks only:
    # iron-strong 2640 x 1.10 + 160 = 2904 + 160 = 3064 mL -> 2 flasks of 2000 mL
    # thiocyanate 2040 x 1.10 + 160 = 2244 + 160 = 2404 mL -> 2 flasks of 2000 mL
    # acid        1320 x 1.10 + 160 = 1452 + 160 = 1612 mL; iron-dilute 0 (not used)
    # and the two stocks are made up to the mark in the acid (issue 11, item 9): 2 x 2000 +
    # 2 x 2000 = 8000 mL more acid, 1612 + 8000 = 9612 mL.
    assert totals.to_prepare == pytest.approx(
        {"iron-strong": 3064.0, "iron-dilute": 0.0, "thiocyanate": 2404.0, "acid": 9612.0}
    )
    assert totals.for_stocks == pytest.approx({"acid": 8000.0})
    assert totals.dead_volume_mL == 4.0


def test_hand_typed_bench_preparations(big_session):
    made = {p.stock: p for p in preparations(big_session, stock_totals(big_session, BENCH))}
    # iron-dilute is not used, so nothing is made of it.
    assert list(made) == ["iron-strong", "thiocyanate", "acid"]
    # iron-strong 3064 mL > 2000: ceil(3064/2000) = 2 flasks of 2000 mL, each
    # 0.40 mol/L x 2.000 L x 403.992 g/mol / 0.985 = 328.115 g of Fe(NO3)3(H2O)9.
    iron = made["iron-strong"]
    assert (iron.flask_mL, iron.flasks) == (2000.0, 2)
    assert iron.provides == "Fe3+"
    assert iron.concentration_M == 0.40
    assert iron.mass_g == pytest.approx(
        0.40 * 2.000 * _molar_mass("Fe(NO3)3(H2O)9") / 0.985, rel=1e-9
    )
    assert iron.mass_g == pytest.approx(328.115, abs=0.01)
    # thiocyanate 2404 mL: 2 flasks of 2000 mL, each
    # 6.0e-4 x 2.000 x 97.176 / 0.99 = 0.117789 g of KSCN.
    scn = made["thiocyanate"]
    assert (scn.flask_mL, scn.flasks) == (2000.0, 2)
    assert scn.provides == "SCN-"
    assert scn.mass_g == pytest.approx(6.0e-4 * 2.000 * _molar_mass("KSCN") / 0.99, rel=1e-9)
    assert scn.mass_g == pytest.approx(0.117789, abs=1e-5)
    # acid 9612 mL (the stocks' medium included): ceil(9612/2000) = 5 flasks of 2000 mL, no
    # solid (it is the diluent).
    acid = made["acid"]
    assert (acid.flask_mL, acid.flasks, acid.mass_g) == (2000.0, 5, 0.0)
    assert (acid.source, acid.aliquot_mL) == ("", 0.0)


def test_hand_typed_dilution_recipe_and_medium(big_session):
    # iron-dilute listed without its solid (an invented edit): Fe3+ 0.040, H+ 0.5, NO3- 0.62
    # mol/L is iron-strong (0.40, 0.5, 1.7) diluted with the acid (H+ 0.5, NO3- 0.5) at
    # a = 0.040/0.40 = 0.1: NO3- 0.1 x 1.7 + 0.9 x 0.5 = 0.62, H+ 0.1 x 0.5 + 0.9 x 0.5 = 0.5.
    inputs = dataclasses.replace(
        big_session,
        stocks=tuple(
            dataclasses.replace(st, solid=None) if st.id == "iron-dilute" else st
            for st in big_session.stocks
        ),
    )
    bench = (*BENCH, _mixture("T3", "test", {"acid": 5.0, "iron-dilute": 5.0}))
    totals = stock_totals(inputs, bench)
    # iron-dilute: 5 mL per bench x 120 = 600 mL; 600 x 1.10 + 160 = 820 mL -> one 1000 mL
    # flask with 0.1 x 1000 = 100 mL of iron-strong, made up with 900 mL of acid.
    # iron-strong: 3064 + 100 = 3164 mL -> 2 x 2000 mL, 4000 mL of acid; thiocyanate 2 x 2000,
    # 4000 mL of acid; acid: 16 mL per bench x 120 = 1920; 1920 x 1.10 + 160 = 2272 mL,
    # + 900 + 4000 + 4000 = 11172 mL.
    assert totals.for_stocks == pytest.approx({"iron-strong": 100.0, "acid": 8900.0})
    assert totals.to_prepare == pytest.approx(
        {"iron-strong": 3164.0, "iron-dilute": 820.0, "thiocyanate": 2404.0, "acid": 11172.0}
    )
    made = {p.stock: p for p in preparations(inputs, totals)}
    dilute = made["iron-dilute"]
    assert (dilute.flask_mL, dilute.flasks) == (1000.0, 1)
    assert dilute.source == "iron-strong"
    assert dilute.aliquot_mL == pytest.approx(100.0, rel=1e-12)
    assert (dilute.provides, dilute.concentration_M, dilute.mass_g) == ("Fe3+", 0.040, 0.0)
    assert made["iron-strong"].source == ""
    assert made["acid"].flasks == 6  # ceil(11172 / 2000)


def test_a_stock_no_other_makes_is_supplied(big_session):
    # thiocyanate without its solid: no other stock holds SCN-, so it has no recipe here
    # and takes no medium (2404 mL of it must be supplied ready-made).
    inputs = dataclasses.replace(
        big_session,
        stocks=tuple(
            dataclasses.replace(st, solid=None) if st.id == "thiocyanate" else st
            for st in big_session.stocks
        ),
    )
    totals = stock_totals(inputs, BENCH)
    assert totals.for_stocks == pytest.approx({"acid": 4000.0})  # iron-strong's 2 x 2000
    made = {p.stock: p for p in preparations(inputs, totals)}
    assert (made["thiocyanate"].source, made["thiocyanate"].solid_formula) == ("", "")
    assert made["thiocyanate"].medium == ""  # its label names no medium it was made up in


@pytest.mark.parametrize(
    ("to_prepare_mL", "flask_mL", "flasks"),
    [
        (50.0, 100.0, 1),  # fits the smallest flask
        (100.0, 100.0, 1),  # exactly full
        (100.5, 250.0, 1),  # just over: the next size
        (999.0, 1000.0, 1),
        (2000.0, 2000.0, 1),
        (2000.5, 2000.0, 2),  # ceil(2000.5/2000) = 2
        (6001.0, 2000.0, 4),  # ceil(6001/2000) = 4
    ],
)
def test_flask_choice(big_session, to_prepare_mL, flask_mL, flasks):
    stocks = [s.id for s in big_session.stocks]
    totals = Totals(
        per_bench=dict.fromkeys(stocks, 1.0),
        per_section=dict.fromkeys(stocks, 1.0),
        session=dict.fromkeys(stocks, 1.0),
        to_prepare={**dict.fromkeys(stocks, 0.0), "iron-dilute": to_prepare_mL},
        dead_volume_mL=4.0,
    )
    (prep,) = preparations(big_session, totals)
    assert prep.stock == "iron-dilute"
    assert (prep.flask_mL, prep.flasks) == (flask_mL, flasks)
    # Mass per flask: 0.040 mol/L x flask volume x 403.992 g/mol / 0.985.
    assert prep.mass_g == pytest.approx(
        0.040 * flask_mL / 1000.0 * _molar_mass("Fe(NO3)3(H2O)9") / 0.985, rel=1e-9
    )
