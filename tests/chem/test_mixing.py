"""Mixing stocks: ion table, dilution and ionic strength after reaction, worked by hand.

Outside references, each worked out with numbers in the test:

- dilution, c = sum_k c_k V_k / V_total (conservation of amount; Harris, Quantitative
  Chemical Analysis, 9th ed., 2016, eq. 1-5, from memory);
- electroneutrality of each stock, sum c z = 0, fixing the unlisted counter-ion (Harris,
  section 8-5 "Charge balance", from memory);
- ionic strength, I = 1/2 sum c z^2 (IUPAC Compendium of Chemical Terminology, the Gold Book,
  "ionic strength", from memory).

The stocks are invented: an iron(III) stock in acid that lists no anion (so it needs a
counter-anion X-), a thiocyanate stock listing all its ions, and an acid diluent that lists no
anion either, so X- and H+ are each shared between stocks.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.chem.mixing import ion_table, ionic_strength_after_reaction_M, medium_label, mix_M
from planner.chem.species import COUNTER_ANION
from planner.inputs import ProductSpecies, Reaction, Stock

IRON = Stock(id="iron", contains_M={"Fe3+": 0.20, "H+": 0.50})
THIOCYANATE = Stock(
    id="thiocyanate", contains_M={"SCN-": 2.0e-3, "K+": 2.0e-3, "H+": 0.50, "NO3-": 0.50}
)
ACID = Stock(id="acid", contains_M={"H+": 0.50}, diluent=True)
STOCKS = (IRON, THIOCYANATE, ACID)

# Ion order: first appearance over the stocks in the order given.
NAMES = ("Fe3+", "H+", COUNTER_ANION, "SCN-", "K+", "NO3-")

# Iron(III) thiocyanate 1:1 and 1:2 (de Berg, Maeder and Clifford, Inorganica Chimica Acta 445
# (2016) 155-159: K1 = 98, K2 = 7 L/mol); only the charges matter to the ionic strength.
REACTION = Reaction(
    temperature_C=25.0,
    ionic_strength_M=0.5,
    components=("Fe3+", "SCN-"),
    species=(
        ProductSpecies("FeSCN2+", {"Fe3+": 1, "SCN-": 1}, math.log10(98.0), 4700.0),
        ProductSpecies("Fe(SCN)2+", {"Fe3+": 1, "SCN-": 2}, math.log10(98.0 * 7.0), 0.0),
    ),
)


def test_ion_table_lists_every_ion_with_its_counter_ions():
    table = ion_table(STOCKS)
    assert table.names == NAMES
    assert table.stock_ids == ("iron", "thiocyanate", "acid")
    np.testing.assert_array_equal(table.charges, [3, 1, -1, -1, 1, -1])
    # Charge balance of each stock, by hand:
    # iron: 3 x 0.20 + 1 x 0.50 = 1.10 mol/L of positive charge -> X- 1.10 mol/L;
    # thiocyanate: K+ 0.002 + H+ 0.50 = 0.502 = SCN- 0.002 + NO3- 0.50 -> neutral as
    #   listed, no counter-ion;
    # acid: H+ 0.50 -> X- 0.50.
    expected = np.array(
        [
            # Fe3+  H+    X-    SCN-    K+      NO3-
            [0.20, 0.50, 1.10, 0.0, 0.0, 0.0],
            [0.0, 0.50, 0.0, 2.0e-3, 2.0e-3, 0.50],
            [0.0, 0.50, 0.50, 0.0, 0.0, 0.0],
        ]
    )
    np.testing.assert_allclose(table.stock_M, expected, rtol=1e-12, atol=0)


def test_mix_is_c_v_over_v_total_with_shared_ions():
    table = ion_table(STOCKS)
    volumes = np.array([[2.0, 3.0, 5.0], [5.0, 1.0, 4.0], [0.0, 0.0, 10.0]])
    mixed = mix_M(table, volumes, 10.0)
    # Mixture 1: iron 2.00 mL, thiocyanate 3.00 mL, acid 5.00 mL in 10.00 mL.
    #   Fe3+ = 0.20 x 2/10 = 0.040
    #   H+   = (0.50 x 2 + 0.50 x 3 + 0.50 x 5)/10 = 0.50          (in all three stocks)
    #   X-   = (1.10 x 2 + 0.50 x 5)/10 = (2.2 + 2.5)/10 = 0.47    (iron's and acid's)
    #   SCN- = 2.0e-3 x 3/10 = 6.0e-4; K+ = 6.0e-4
    #   NO3- = 0.50 x 3/10 = 0.15                                  (thiocyanate's only)
    # Mixture 2: iron 5, thiocyanate 1, acid 4 mL in 10 mL.
    #   Fe3+ = 0.20 x 5/10 = 0.10; H+ = 0.50; X- = (1.10 x 5 + 0.50 x 4)/10 = 0.75
    #   SCN- = K+ = 2.0e-3 x 1/10 = 2.0e-4; NO3- = 0.50 x 1/10 = 0.050
    # Mixture 3: acid alone: H+ = X- = 0.50.
    expected = np.array(
        [
            [0.040, 0.50, 0.47, 6.0e-4, 6.0e-4, 0.15],
            [0.10, 0.50, 0.75, 2.0e-4, 2.0e-4, 0.050],
            [0.0, 0.50, 0.50, 0.0, 0.0, 0.0],
        ]
    )
    np.testing.assert_allclose(mixed, expected, rtol=1e-12, atol=1e-15)
    # Each mixture is electrically neutral: in mixture 1, 3 x 0.040 + 0.50 + 6.0e-4 = 0.6206
    # positive against 0.47 + 6.0e-4 + 0.15 = 0.6206 negative.
    np.testing.assert_allclose(mixed @ table.charges, 0.0, atol=1e-14)


def test_mix_with_a_total_volume_per_mixture():
    # The same deliveries into 10 mL and into 25 mL: every concentration scales by 10/25.
    table = ion_table(STOCKS)
    volumes = np.array([[2.0, 3.0, 5.0], [2.0, 3.0, 5.0]])
    mixed = mix_M(table, volumes, np.array([10.0, 25.0]))
    # Fe3+ = 0.20 x 2/25 = 0.016; X- = (2.2 + 2.5)/25 = 0.188; NO3- = 0.50 x 3/25 = 0.060.
    np.testing.assert_allclose(mixed[1, [0, 2, 5]], [0.016, 0.188, 0.060], rtol=1e-12)
    np.testing.assert_allclose(mixed[1], mixed[0] * 10.0 / 25.0, rtol=1e-12)


def test_ionic_strength_after_a_one_to_one_complex_forms():
    table = ion_table(STOCKS)
    initial = mix_M(table, np.array([[2.0, 3.0, 5.0]]), 10.0)
    # Let x = [FeSCN2+] = 5.0e-4 mol/L form (no 1:2 complex): free Fe3+ = 0.040 - 5.0e-4 =
    # 0.0395, free SCN- = 6.0e-4 - 5.0e-4 = 1.0e-4; spectators keep their initial values.
    free = np.array([[0.0395, 1.0e-4]])
    species = np.array([[5.0e-4, 0.0]])
    # I = 1/2 sum c z^2 (IUPAC Gold Book, ionic strength, from memory):
    #   Fe3+    0.0395 x 9 = 0.3555
    #   SCN-    1.0e-4 x 1 = 0.0001
    #   FeSCN2+ 5.0e-4 x 4 = 0.0020
    #   H+      0.50   x 1 = 0.5000
    #   X-      0.47   x 1 = 0.4700
    #   K+      6.0e-4 x 1 = 0.0006
    #   NO3-    0.15   x 1 = 0.1500
    #   sum = 1.4782, I = 0.7391 mol/L
    result = ionic_strength_after_reaction_M(table, initial, REACTION, free, species)
    assert result.shape == (1,)
    assert result[0] == pytest.approx(0.7391, rel=1e-12)
    # Before reaction: 0.040 x 9 + 6.0e-4 + 0.50 + 0.47 + 6.0e-4 + 0.15 = 1.4812, I = 0.7406;
    # forming x of a 2+ ion from a 3+ and a 1- changes sum c z^2 by x (4 - 9 - 1) = -6x, so
    # I falls by 3x = 1.5e-3 mol/L.
    no_reaction = ionic_strength_after_reaction_M(
        table, initial, REACTION, np.array([[0.040, 6.0e-4]]), np.array([[0.0, 0.0]])
    )
    assert no_reaction[0] == pytest.approx(0.7406, rel=1e-12)
    assert no_reaction[0] - result[0] == pytest.approx(3 * 5.0e-4, rel=1e-9)


def test_ionic_strength_counts_the_one_to_two_complex_with_charge_one():
    # Fe(SCN)2+ = Fe3+ + 2 SCN-: charge 3 - 2 = +1 (conservation of charge). Take 1.0e-4 mol/L
    # of it and 3.0e-4 of FeSCN2+ in mixture 1: free Fe3+ = 0.040 - 4.0e-4 = 0.0396,
    # free SCN- = 6.0e-4 - 3.0e-4 - 2 x 1.0e-4 = 1.0e-4.
    table = ion_table(STOCKS)
    initial = mix_M(table, np.array([[2.0, 3.0, 5.0]]), 10.0)
    free = np.array([[0.0396, 1.0e-4]])
    species = np.array([[3.0e-4, 1.0e-4]])
    # sum c z^2 = 0.0396 x 9 + 1.0e-4 + 3.0e-4 x 4 + 1.0e-4 x 1 + 0.50 + 0.47 + 6.0e-4
    #           + 0.15 = 0.3564 + 0.0001 + 0.0012 + 0.0001 + 1.1206 = 1.4784; I = 0.7392.
    result = ionic_strength_after_reaction_M(table, initial, REACTION, free, species)
    assert result[0] == pytest.approx(0.7392, rel=1e-12)


def test_medium_label_names_the_diluent_and_its_ions_or_water():
    # Label text as the prep sheet prints it, typed by hand from the stock above.
    assert medium_label(ACID) == "acid (H+ 0.5 mol/L)"
    assert medium_label(None) == "water"
    assert medium_label(Stock(id="plain", contains_M={}, diluent=True)) == "water"
