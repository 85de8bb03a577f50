"""The planner's table of relative atomic masses against the periodictable package.

periodictable 2.1 tabulates the CIAAW standard atomic weights 2021 (Prohaska et al., Pure Appl.
Chem. 94 (2022) 573) and the AME 2020 isotope masses; it is the independent library the
planner's own table (read at run time without it) must equal, value for value.
"""

from __future__ import annotations

import periodictable
import pytest

from planner.chem.atomic_weights import ATOMIC_WEIGHTS
from planner.chem.species import molar_mass_g_per_mol


def test_every_element_has_periodictables_mass():
    elements = [e for e in periodictable.elements if e.number > 0]
    assert len(elements) == 118
    for element in elements:
        assert ATOMIC_WEIGHTS[element.symbol] == element.mass, element.symbol
    for isotope in ("D", "T"):
        assert ATOMIC_WEIGHTS[isotope] == periodictable.elements.symbol(isotope).mass
    assert len(ATOMIC_WEIGHTS) == 120


@pytest.mark.parametrize(
    ("symbol", "weight"),
    [
        # Prohaska et al. 2022, Table 2 (abridged values), from memory: the common ones.
        ("H", 1.008),
        ("C", 12.011),
        ("N", 14.007),
        ("O", 15.999),
        ("Fe", 55.845),
        ("Cu", 63.546),
        ("Cl", 35.45),
    ],
)
def test_common_elements_carry_the_abridged_standard_weights(symbol, weight):
    assert ATOMIC_WEIGHTS[symbol] == weight


def test_heavy_water_weighs_with_deuterium():
    # 2 x 2.01410177784 + 15.999 (AME 2020 for 2H; standard weight of O), by hand: 20.0272.
    assert molar_mass_g_per_mol("D2O") == pytest.approx(2 * 2.01410177784 + 15.999, rel=1e-15)
