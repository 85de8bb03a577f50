"""Tests of planner.chem.species: charges from names, counter-ions, ionic strength, molar mass.

Expected charges are the charge numbers of the named ions as chemists write them (IUPAC,
Nomenclature of Inorganic Chemistry, Recommendations 2005, Table IX, from memory); ionic
strengths follow the IUPAC Gold Book definition I = 1/2 sum c_i z_i^2; molar masses are worked
by hand from the IUPAC CIAAW standard atomic weights 2021 (abridged) written out below.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from planner.chem.species import (
    COUNTER_ANION,
    COUNTER_CATION,
    charge_from_name,
    ionic_strength_M,
    molar_mass_g_per_mol,
    neutralised,
    species_charge,
)
from planner.errors import InvalidInputError

# ---------------------------------------------------------------------------------------------
# Charges from names
# ---------------------------------------------------------------------------------------------

# Charge numbers of common ions and generic species (IUPAC Red Book 2005, Table IX, from
# memory; the generic L-, CuL+, NiL2 are defined by their written charge, DESIGN section 5).
KNOWN_CHARGES = [
    ("Fe3+", 3),
    ("SCN-", -1),
    ("H+", 1),
    ("Cu2+", 2),
    ("L-", -1),
    ("CuL+", 1),
    ("NiL2", 0),
    ("EDTA4-", -4),
    ("Cl-", -1),
    ("FeSCN2+", 2),
    ("Fe+++", 3),
    ("SO4--", -2),
    # Ambiguous endings: the final digit is a subscript of a polyatomic ion.
    ("NO3-", -1),  # nitrate, not charge -3
    ("NO2-", -1),  # nitrite
    ("ClO4-", -1),  # perchlorate
    ("ClO3-", -1),  # chlorate
    ("BrO3-", -1),  # bromate
    ("IO3-", -1),  # iodate
    ("MnO4-", -1),  # permanganate
    ("SO42-", -2),  # sulfate
    ("SO32-", -2),  # sulfite
    ("HSO4-", -1),  # hydrogensulfate
    ("CO32-", -2),  # carbonate
    ("HCO3-", -1),  # hydrogencarbonate
    ("PO43-", -3),  # phosphate
    ("HPO42-", -2),  # hydrogenphosphate
    ("H2PO4-", -1),  # dihydrogenphosphate
    ("NH4+", 1),  # ammonium
    ("H3O+", 1),  # oxonium
    ("CH3COO-", -1),  # acetate
    ("C2O42-", -2),  # oxalate
    ("HC2O4-", -1),  # hydrogenoxalate
    ("S2O32-", -2),  # thiosulfate
    ("CrO42-", -2),  # chromate
    ("Cr2O72-", -2),  # dichromate
    ("UO22+", 2),  # uranyl
    ("FeSO4+", 1),  # iron(III) sulfato complex [FeSO4]+
    ("Fe(SCN)2+", 1),  # [Fe(SCN)2]+, DESIGN section 4's 1:2 complex
    ("Cu(NH3)42+", 2),  # tetraamminecopper(II)
    ("[Fe(CN)6]3-", -3),  # hexacyanoferrate(III)
    ("Fe(CN)64-", -4),  # hexacyanoferrate(II)
    # Explicit notations.
    ("SO4^2-", -2),
    ("SO4 2-", -2),
    ("SO4^{2-}", -2),
    ("Fe^3+", 3),
    ("Fe^+3", 3),
    ("NO3^-", -1),
    ("Fe³⁺", 3),
    ("SO₄²⁻", -2),
    ("NO₃⁻", -1),
    ("Fe(H2O)6 3+", 3),
    ("  SCN-  ", -1),
    ("OH−", -1),  # Unicode minus sign
]


@pytest.mark.parametrize(("name", "expected"), KNOWN_CHARGES)
def test_charge_from_name_table(name, expected):
    assert charge_from_name(name) == expected


@pytest.mark.parametrize(
    "name",
    ["", "   ", "3+", "+", "Fe+3", "F-e", "Fe+-", "Fe0+", "SO4^x", "Fe^", "Fe SCN2+", "^2-"],
)
def test_charge_from_name_rejects_bad_names_naming_the_field(name):
    with pytest.raises(InvalidInputError, match=r"^name: ") as info:
        charge_from_name(name)
    assert info.value.field == "name"
    assert "SO4^2-" in info.value.hint  # the hint shows the accepted notations


_BODIES = st.sampled_from(["Fe", "SO4", "NO3", "CuL", "Fe(SCN)2", "EDTA", "PO4", "NiL2"])
_MAGNITUDES = st.integers(min_value=1, max_value=12)


@given(body=_BODIES, magnitude=_MAGNITUDES, sign=st.sampled_from(["+", "-"]))
def test_explicit_caret_and_space_notation_is_taken_as_written(body, magnitude, sign):
    # Rule 1: a charge after a caret or a space is read as written, whatever the formula.
    expected = magnitude if sign == "+" else -magnitude
    assert charge_from_name(f"{body}^{magnitude}{sign}") == expected
    assert charge_from_name(f"{body} {magnitude}{sign}") == expected
    assert charge_from_name(f"{body}^{sign}{magnitude}") == expected


@given(body=_BODIES, count=st.integers(min_value=2, max_value=6), sign=st.sampled_from("+-"))
def test_repeated_signs_count_one_each(body, count, sign):
    # Rule 2: "Fe+++" is +3; digits before repeated signs belong to the formula.
    expected = count if sign == "+" else -count
    assert charge_from_name(body + sign * count) == expected


def test_species_charge_from_formula():
    # Charge conservation: [Fe(SCN)2]+ = Fe3+ + 2 SCN- gives 3 - 2 = +1.
    charges = {"Fe3+": 3, "SCN-": -1, "H+": 1}
    assert species_charge({"Fe3+": 1, "SCN-": 1}, charges) == 2
    assert species_charge({"Fe3+": 1, "SCN-": 2}, charges) == 1
    # FeOH2+ written as Fe3+ with one proton removed: 3 - 1 = +2.
    assert species_charge({"Fe3+": 1, "H+": -1}, charges) == 2


def test_species_charge_unknown_component_names_the_field():
    with pytest.raises(InvalidInputError, match=re.escape("formula.Cu2+")):
        species_charge({"Cu2+": 1}, {"Fe3+": 3})


def test_species_charge_rejects_fractional_coefficient():
    with pytest.raises(InvalidInputError, match=re.escape("formula.SCN-")):
        species_charge({"SCN-": 1.5}, {"SCN-": -1})  # type: ignore[dict-item]


# ---------------------------------------------------------------------------------------------
# Counter-ions
# ---------------------------------------------------------------------------------------------


def test_neutralised_adds_counter_anion():
    # Charge balance worked by hand: 3 x 0.25 + 1 x 0.5 = 1.25 mol/L of positive charge.
    result = neutralised({"Fe3+": 0.25, "H+": 0.5})
    assert list(result) == ["Fe3+", "H+", COUNTER_ANION]
    assert result[COUNTER_ANION] == pytest.approx(1.25, rel=1e-12)
    assert COUNTER_CATION not in result


def test_neutralised_adds_counter_cation():
    # 4 x 0.01 - 1 x 0.02 = 0.02 mol/L of negative charge, balanced by X+ at 0.02 mol/L.
    result = neutralised({"EDTA4-": 0.01, "Na+": 0.02})
    assert list(result) == ["EDTA4-", "Na+", COUNTER_CATION]
    assert result[COUNTER_CATION] == pytest.approx(0.02, rel=1e-12)


def test_neutralised_leaves_neutral_stock_alone():
    # 0.1 mol/L KSCN: +0.1 - 0.1 = 0; 0.1 + 0.2 - 0.3 differs from 0 only by rounding.
    assert neutralised({"K+": 0.1, "SCN-": 0.1}) == {"K+": 0.1, "SCN-": 0.1}
    assert neutralised({"Na+": 0.1, "H+": 0.2, "Cl-": 0.3}) == {
        "Na+": 0.1,
        "H+": 0.2,
        "Cl-": 0.3,
    }
    assert neutralised({}) == {}


def test_neutralised_adds_to_a_listed_counter_ion():
    result = neutralised({"H+": 0.5, COUNTER_ANION: 0.2})
    assert list(result) == ["H+", COUNTER_ANION]
    assert result[COUNTER_ANION] == pytest.approx(0.5, rel=1e-12)


def test_neutralised_does_not_mutate_its_argument():
    stock = {"H+": 0.5}
    neutralised(stock)
    assert stock == {"H+": 0.5}


def test_neutralised_bad_name_names_the_field():
    with pytest.raises(InvalidInputError, match=re.escape("contains_M.Fe+3")):
        neutralised({"Fe+3": 0.1})


def test_neutralised_negative_concentration_names_the_field():
    with pytest.raises(InvalidInputError, match=re.escape("contains_M.H+")):
        neutralised({"H+": -0.1})


_IONS = st.sampled_from(["Fe3+", "H+", "SCN-", "SO42-", "NO3-", "Cu2+", "EDTA4-", "NH4+"])


@given(st.dictionaries(_IONS, st.floats(min_value=0.0, max_value=2.0), max_size=6))
def test_neutralised_stock_is_electrically_neutral(stock):
    # Electroneutrality, sum c_i z_i = 0, with X- and X+ monovalent.
    result = neutralised(stock)
    charges = [charge_from_name(name) for name in result]
    net = sum(c * z for c, z in zip(result.values(), charges, strict=True))
    gross = sum(c * abs(z) for c, z in zip(result.values(), charges, strict=True))
    assert abs(net) <= 1e-12 * max(gross, 1e-300) + 1e-300
    assert not (COUNTER_ANION in result and COUNTER_CATION in result)


# ---------------------------------------------------------------------------------------------
# Ionic strength, I = 1/2 sum c_i z_i^2 (IUPAC Gold Book, "ionic strength")
# ---------------------------------------------------------------------------------------------


def test_ionic_strength_of_simple_salts():
    concentrations_M = np.array(
        [
            [0.1, 0.1, 0.0, 0.0],  # 0.1 mol/L NaCl: 1/2 (0.1 + 0.1) = 0.1
            [0.0, 0.0, 0.1, 0.1],  # 0.1 mol/L MgSO4: 1/2 (0.1 x 4 + 0.1 x 4) = 0.4
            [0.2, 0.0, 0.0, 0.1],  # 0.1 mol/L Na2SO4: 1/2 (0.2 x 1 + 0.1 x 4) = 0.3
        ]
    )
    charges = [1, -1, 2, -2]  # Na+, Cl-, Mg2+, SO42-
    result = ionic_strength_M(concentrations_M, charges)
    assert result.shape == (3,)
    np.testing.assert_allclose(result, [0.1, 0.4, 0.3], rtol=1e-12)  # definition, IUPAC


def test_ionic_strength_one_solution_gives_0d():
    # 0.25 mol/L Fe3+ with 0.5 mol/L H+ and 1.25 mol/L X-, worked by hand:
    # 1/2 (0.25 x 9 + 0.5 x 1 + 1.25 x 1) = 2.0 mol/L.
    result = ionic_strength_M([0.25, 0.5, 1.25], np.array([3, 1, -1]))
    assert result.shape == ()
    assert float(result) == pytest.approx(2.0, rel=1e-12)


def test_ionic_strength_wrong_number_of_charges_names_the_field():
    with pytest.raises(InvalidInputError, match=r"^charges: "):
        ionic_strength_M(np.zeros((2, 3)), [1, -1])


@given(
    st.lists(st.floats(min_value=0.0, max_value=5.0), min_size=1, max_size=5),
    st.floats(min_value=0.0, max_value=10.0),
)
def test_ionic_strength_scales_linearly_with_dilution(concentrations_M, factor):
    # I is linear in the concentrations (definition).
    charges = np.arange(1, len(concentrations_M) + 1) * (-1) ** np.arange(len(concentrations_M))
    base = ionic_strength_M(concentrations_M, charges)
    scaled = ionic_strength_M(np.asarray(concentrations_M) * factor, charges)
    assert float(scaled) == pytest.approx(factor * float(base), rel=1e-12, abs=1e-300)
    assert float(base) >= 0.0


# ---------------------------------------------------------------------------------------------
# Molar masses, worked by hand
# ---------------------------------------------------------------------------------------------

# IUPAC CIAAW standard atomic weights 2021 (abridged), T. Prohaska et al., Pure Appl. Chem. 94
# (2022) 573-600, doi:10.1515/pac-2019-0603, abridged table at ciaaw.org [g/mol per atom].
A_H = 1.0080
A_C = 12.011
A_N = 14.007
A_O = 15.999
A_NA = 22.990
A_S = 32.06
A_CL = 35.45
A_K = 39.098
A_FE = 55.845
A_CU = 63.546
WATER = 2 * A_H + A_O  # 18.015

# Tolerance 0.01 g/mol: the abridged weights are rounded to five significant figures, so a
# sum of a few dozen atoms can differ from the unabridged weights by a few mg/mol.
TOLERANCE_G_PER_MOL = 0.01

MOLAR_MASSES = [
    ("KSCN", A_K + A_S + A_C + A_N),  # 97.176
    ("NaCl", A_NA + A_CL),  # 58.44
    ("Fe(NO3)3(H2O)9", A_FE + 3 * (A_N + 3 * A_O) + 9 * WATER),  # 403.992
    ("Fe(NO3)3·9H2O", A_FE + 3 * (A_N + 3 * A_O) + 9 * WATER),
    ("Fe(NO3)3.9H2O", A_FE + 3 * (A_N + 3 * A_O) + 9 * WATER),
    ("Fe(NO3)3 9H2O", A_FE + 3 * (A_N + 3 * A_O) + 9 * WATER),
    ("CuSO4*5H2O", A_CU + A_S + 4 * A_O + 5 * WATER),  # 249.677
    ("CuSO4·5H2O", A_CU + A_S + 4 * A_O + 5 * WATER),
    ("CuSO4+5H2O", A_CU + A_S + 4 * A_O + 5 * WATER),
    ("CaSO4·0.5H2O", 40.078 + A_S + 4 * A_O + 0.5 * WATER),  # A_r(Ca) = 40.078, same table
    ("K2(SO4)", 2 * A_K + A_S + 4 * A_O),
]


@pytest.mark.parametrize(("formula", "expected_g_per_mol"), MOLAR_MASSES)
def test_molar_mass_against_standard_atomic_weights(formula, expected_g_per_mol):
    assert molar_mass_g_per_mol(formula) == pytest.approx(
        expected_g_per_mol, abs=TOLERANCE_G_PER_MOL
    )


_SYMBOLS = ("H", "C", "N", "O", "Na", "Mg", "S", "Cl", "K", "Ca", "Fe", "Co", "Ni", "Cu")


@st.composite
def _formula_bodies(draw, depth=0):
    """Element symbols with counts, and parenthesised groups with counts, nested twice (at
    most 729 atoms and 5e4 g/mol, inside the limits of a solid to weigh out)."""
    parts = []
    for _ in range(draw(st.integers(1, 3))):
        count = draw(st.sampled_from(["", "2", "3"]))
        if depth < 2 and draw(st.booleans()):
            parts.append(f"({draw(_formula_bodies(depth + 1))}){count}")
        else:
            parts.append(draw(st.sampled_from(_SYMBOLS)) + count)
    return "".join(parts)


@given(
    body=_formula_bodies(),
    water=st.sampled_from(["", "(H2O)9", "·9H2O", ".0.5H2O", "*2.25H2O"]),
)
def test_formula_reader_weighs_as_periodictable_parses(body, water):
    # The planner reads formulas itself; periodictable's own parser (pyparsing grammar) is the
    # reference, summing the same atomic weights (IUPAC 2021, Prohaska et al. 2022).
    import periodictable

    formula = body + water
    canonical = body + {"": "", "(H2O)9": "(H2O)9", "·9H2O": "(H2O)9"}.get(
        water, "(H2O)" + water[1:-3]
    )
    expected = float(periodictable.formula(canonical).mass)
    assert molar_mass_g_per_mol(formula) == pytest.approx(expected, rel=1e-12)


def test_dot_hydrate_is_not_read_as_a_decimal_count():
    # "Fe(NO3)3.9H2O" is the nonahydrate (404 g/mol), not 3.9 nitrate groups (316 g/mol).
    assert molar_mass_g_per_mol("Fe(NO3)3.9H2O") == pytest.approx(
        molar_mass_g_per_mol("Fe(NO3)3(H2O)9"), rel=1e-12
    )


@pytest.mark.parametrize(
    "formula",
    [
        "",
        "  ",
        "Xx",
        "fe",
        "Fe(NO3",
        "Fe)NO3(",
        "()",
        "H0",
        "9H2O",
        "CuSO4·",
        "NaCl+",
        "Na@1",
        "__import__('os')",
        "SCN-",
        "KSCN{1-}",
    ],
)
def test_bad_formula_names_the_field(formula):
    with pytest.raises(InvalidInputError, match=r"^formula: ") as info:
        molar_mass_g_per_mol(formula)
    assert info.value.field == "formula"
    assert "Fe(NO3)3·9H2O" in info.value.hint


# Issue 9: implausible formulas and charges are refused with a message, never a crash.


@pytest.mark.parametrize(
    ("formula", "words"),
    [
        ("(H2O)99999999999999999999", "larger than 1000"),  # was 1.8e21 g/mol
        ("KSCN·1001H2O", "larger than 1000"),
        ("KSCN." + "9" * 5000 + "H2O", "larger than 1000"),  # int() refuses > 4300 digits
        ("K" + "9" * 5000, "larger than 1000"),
        ("((H1000)1000)", "more than the 10000 atoms"),
        ("((((((H1000)1000)1000)1000)1000)1000)", "more than the 10000 atoms"),
        # 1000 lead atoms: 1000 x 207.2 g/mol (IUPAC 2021 standard atomic weight of Pb)
        ("Pb1000", "above the 100000 g/mol"),
    ],
)
def test_implausible_formula_is_refused(formula, words):
    with pytest.raises(InvalidInputError, match=r"^formula: ") as info:
        molar_mass_g_per_mol(formula)
    assert words in str(info.value)
    assert len(str(info.value)) < 600  # the value is shortened (docs/plan-file.md)


@pytest.mark.parametrize(
    ("formula", "expected_g_per_mol"),
    [
        # Just inside the limits: 1000 iron atoms, 1000 x 55.845 g/mol; C1000H1000 is
        # 1000 x (12.011 + 1.008) g/mol (IUPAC 2021 abridged standard atomic weights).
        ("Fe1000", 55_845.0),
        ("C1000H1000", 13_019.0),
    ],
)
def test_formulas_inside_the_limits_still_weigh(formula, expected_g_per_mol):
    assert molar_mass_g_per_mol(formula) == pytest.approx(expected_g_per_mol, rel=1e-4)


@pytest.mark.parametrize("name", ["Fe^" + "9" * 5000 + "+", "Fe^99+", "X" + "+" * 31, "Y^31-"])
def test_implausible_charge_is_refused(name):
    with pytest.raises(InvalidInputError, match=r"^name: ") as info:
        charge_from_name(name)
    assert "larger than 30" in str(info.value)


def test_charge_of_thirty_is_read():
    assert charge_from_name("Y^30-") == -30
