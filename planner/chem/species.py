"""Species in the trade's notation: charges, counter-ions, ionic strength and molar masses.

Names such as ``"Fe3+"``, ``"SCN-"``, ``"SO4^2-"`` or ``"NiL2"`` are read with a small explicit
parser (:func:`charge_from_name`); nothing here evaluates user text. The charge of a *product*
species should come from its formula and the charges of its components
(:func:`species_charge`), which is exact, rather than from its name, which can be ambiguous.

Stocks list only the ions that matter to the chemistry; :func:`neutralised` adds the
unspecified monovalent counter-ion (:data:`COUNTER_ANION` or :data:`COUNTER_CATION`) that makes
each stock electrically neutral, so that :func:`ionic_strength_M` counts every ion present.

Units: concentrations [mol/L], charges [unitless] (charge numbers z), molar masses [g/mol].
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.chem.atomic_weights import ATOMIC_WEIGHTS
from planner.errors import InvalidInputError, shown

__all__ = [
    "CHARGE_LIMIT",
    "COUNTER_ANION",
    "COUNTER_CATION",
    "MAX_FORMULA_ATOMS",
    "MAX_FORMULA_COUNT",
    "POLYATOMIC_SUBSCRIPT_ENDINGS",
    "MAX_MOLAR_MASS_g_per_mol",
    "charge_from_name",
    "element_symbols",
    "ionic_strength_M",
    "molar_mass_g_per_mol",
    "neutralised",
    "species_charge",
]

#: Name of the unspecified monovalent anion added to make a positively charged stock neutral.
COUNTER_ANION = "X-"

#: Name of the unspecified monovalent cation added to make a negatively charged stock neutral.
COUNTER_CATION = "X+"

#: Largest |charge number| a name may carry. The most highly charged ions met in solution
#: chemistry are polyoxometalates of charge about -14 (from memory); a charge written as
#: "Fe^99999+" or with thousands of signs is a typo, and a charge of thousands of digits
#: could not even be converted to a number (found by fuzzing).
CHARGE_LIMIT = 30

#: Limits on the formula of a solid to weigh out (found by fuzzing: "(H2O)99999999999999999999"
#: was accepted with a molar mass of 1.8e21 g/mol). The salts and hydrates a prep room weighs
#: have a few dozen atoms and molar masses below about 1000 g/mol; the limits are far above
#: them (common practice) and reject typos and pasted runs of digits.
MAX_FORMULA_COUNT = 1000  #: largest count written in a formula (element, group or hydrate)
MAX_FORMULA_ATOMS = 10_000  #: most atoms in one formula unit
MAX_MOLAR_MASS_g_per_mol = 1e5  #: largest molar mass [g/mol]

#: Formula endings of common polyatomic ions and neutral ligands whose formula ends in a digit
#: that is a subscript, not a charge. When a name ends in one of these followed by a single
#: sign, that digit is read as part of the formula, so ``"NO3-"`` is nitrate (charge -1) and
#: ``"FeSO4+"`` is the iron(III) sulfato complex (charge +1). Each ending is the formula as
#: written in IUPAC, Nomenclature of Inorganic Chemistry, IUPAC Recommendations 2005 (Red Book),
#: Table IX (ions and ligands), from memory; which endings to list is common practice.
POLYATOMIC_SUBSCRIPT_ENDINGS: frozenset[str] = frozenset(
    {
        "NO2",  # nitrite NO2-, nitronium NO2+
        "NO3",  # nitrate NO3-
        "ClO2",  # chlorite ClO2-
        "ClO3",  # chlorate ClO3-
        "ClO4",  # perchlorate ClO4-
        "BrO3",  # bromate BrO3-
        "IO3",  # iodate IO3-
        "IO4",  # periodate IO4-
        "MnO4",  # permanganate MnO4-, manganate MnO42-
        "ReO4",  # perrhenate ReO4-
        "SO3",  # sulfite SO32-, hydrogensulfite HSO3-
        "SO4",  # sulfate SO42-, hydrogensulfate HSO4-
        "S2O3",  # thiosulfate S2O32-
        "S2O8",  # peroxodisulfate S2O82-
        "SeO4",  # selenate SeO42-
        "CO3",  # carbonate CO32-, hydrogencarbonate HCO3-
        "C2O4",  # oxalate C2O42-, hydrogenoxalate HC2O4-
        "PO4",  # phosphate PO43-, HPO42-, H2PO4-
        "AsO4",  # arsenate AsO43-
        "CrO4",  # chromate CrO42-
        "Cr2O7",  # dichromate Cr2O72-
        "MoO4",  # molybdate MoO42-
        "WO4",  # tungstate WO42-
        "VO3",  # metavanadate VO3-
        "BF4",  # tetrafluoroborate BF4-
        "PF6",  # hexafluorophosphate PF6-
        "SiF6",  # hexafluorosilicate SiF62-
        "UO2",  # uranyl UO22+, UO2+
        "NH3",  # ammine ligand, e.g. AgNH3+, methylammonium CH3NH3+
        "NH4",  # ammonium NH4+
        "H3O",  # oxonium H3O+
        "CH3",  # methyl, e.g. HgCH3+
        "N3",  # azide N3- (the nitride reading N3- = -3 is rare in solution)
        "I3",  # triiodide I3-
    }
)

# Unicode superscripts and subscripts, and the minus sign, as typed in word processors.
_SUPERSCRIPTS = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻", "0123456789+-")
_SUBSCRIPTS = str.maketrans("₀₁₂₃₄₅₆₇₈₉", "0123456789")
_SUPERSCRIPT_CHARS = "⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻"
_MINUS_SIGNS = str.maketrans({"−": "-", "–": "-"})

# An explicit charge: magnitude then sign ("2-"), a repeated sign ("--"), or sign then
# magnitude ("-2"), optionally in braces as in TeX ("^{2-}").
_EXPLICIT_CHARGE = re.compile(
    r"^\{?(?:(?P<mag>[0-9]+)(?P<sign>[+-])|(?P<signs>[+-]+)"
    r"|(?P<sign2>[+-])(?P<mag2>[0-9]+))\}?$"
)
_BODY_FORBIDDEN = re.compile(r"[+\-^\s]")

_NAME_HINT = (
    "write the charge at the end, as the trade does: 'Fe3+', 'SCN-', 'FeSCN2+', 'Fe+++', "
    "or explicitly after a caret or a space: 'SO4^2-', 'SO4 2-', 'Fe^3+'; a neutral species "
    "has no sign ('NiL2'); charges of 10 or more need the explicit form ('X^10-')"
)


def _bad_name(name: str, problem: str) -> InvalidInputError:
    return InvalidInputError(problem, field="name", value=name, hint=_NAME_HINT)


def _check_body(name: str, body: str) -> None:
    """Reject a formula part that is empty, signed in the middle or without any letter."""
    if not body:
        raise _bad_name(name, "the name has a charge but no formula before it")
    if _BODY_FORBIDDEN.search(body):
        raise _bad_name(name, "a sign, caret or space appears in the middle of the name")
    if any(ch in _SUPERSCRIPT_CHARS for ch in body):
        raise _bad_name(name, "superscript characters may only form the charge at the end")
    if not any(ch.isalpha() for ch in body):
        raise _bad_name(name, "the formula part of the name has no letter")


def _signed(name: str, magnitude: int, sign: str) -> int:
    if magnitude == 0:
        raise _bad_name(name, "a charge written with a sign cannot be zero")
    return magnitude if sign == "+" else -magnitude


def _explicit_charge(name: str, body: str, charge_text: str) -> int:
    """Charge written after a caret, a space or in superscripts (rule 1)."""
    _check_body(name, body)
    match = _EXPLICIT_CHARGE.match(charge_text)
    if match is None:
        raise _bad_name(
            name, f"the explicit charge {shown(charge_text)} is not like '2-', '+' or '-2'"
        )
    magnitude = match["mag"] or match["mag2"] or ""
    if len(magnitude) > len(str(CHARGE_LIMIT)):  # before int(): thousands of digits fail there
        raise _bad_name(name, f"the charge is larger than {CHARGE_LIMIT} in size")
    if match["signs"]:
        signs = match["signs"]
        if len(set(signs)) > 1:
            raise _bad_name(name, "the charge mixes + and - signs")
        return len(signs) if signs[0] == "+" else -len(signs)
    if match["sign"]:
        return _signed(name, int(match["mag"]), match["sign"])
    return _signed(name, int(match["mag2"]), match["sign2"])


def charge_from_name(name: str) -> int:
    """Charge number of a species from its name in the trade's notation.

    Parameters
    ----------
    name
        Species name, e.g. ``"Fe3+"``, ``"SCN-"``, ``"SO42-"``, ``"SO4^2-"``, ``"NiL2"``.

    Returns
    -------
    int
        Charge number z [unitless].

    Raises
    ------
    InvalidInputError
        With field ``"name"`` for an empty name, a name that is only a charge, a sign, caret or
        space in the middle, mixed signs, a signed charge of zero, or a charge larger than
        :data:`CHARGE_LIMIT` in size.

    Notes
    -----
    The rules, applied in this order:

    1. **Explicit charge.** A charge after a caret or a space (``"SO4^2-"``, ``"SO4 2-"``,
       ``"Fe^3+"``, ``"Fe^{3+}"``, ``"Fe^+3"``) or in Unicode superscripts (``"SO₄²⁻"``) is
       taken as written. Subscript digits count as ordinary digits.
    2. **Repeated signs** (``"Fe+++"``, ``"SO4--"``) count one each; digits before them belong
       to the formula.
    3. **Polyatomic endings.** With a single sign and a single digit before it, the digit is a
       subscript when it completes one of :data:`POLYATOMIC_SUBSCRIPT_ENDINGS`, so ``"NO3-"``
       is -1, ``"NH4+"`` +1, ``"HSO4-"`` -1, ``"FeSO4+"`` +1. The same holds after a closing
       parenthesis, which is a group count: ``"Fe(SCN)2+"`` is +1.
    4. **Trailing digits.** Otherwise the digit immediately before a single trailing sign is
       the magnitude (``"Fe3+"`` +3, ``"FeSCN2+"`` +2, ``"EDTA4-"`` -4, ``"[Fe(CN)6]3-"`` -3).
       When two or more digits precede the sign, only the last is the magnitude and the others
       are a subscript (``"SO42-"`` -2, ``"HPO42-"`` -2, ``"Cu(NH3)42+"`` +2, ``"UO22+"`` +2),
       because ions of charge 10 or more are written with an explicit charge.
    5. **No sign** means a neutral species: ``"NiL2"`` is 0.

    Some names stay ambiguous whatever the rules (``"FeCl2+"`` is written for both FeCl²⁺ and
    FeCl₂⁺); write those with an explicit charge. The charge of a product species is best
    taken from its formula with :func:`species_charge`, which is exact. The rules are common
    practice of chemical notation; the polyatomic endings are listed with
    :data:`POLYATOMIC_SUBSCRIPT_ENDINGS`.

    Examples
    --------
    >>> charge_from_name("Fe3+"), charge_from_name("NO3-"), charge_from_name("SO4^2-")
    (3, -1, -2)
    """
    if not isinstance(name, str):
        raise InvalidInputError(
            "a species name must be text", field="name", value=name, hint=_NAME_HINT
        )
    charge = _cached_charge(name)
    if abs(charge) > CHARGE_LIMIT:
        raise _bad_name(name, f"the charge is larger than {CHARGE_LIMIT} in size")
    return charge


@functools.lru_cache(maxsize=1024)
def _cached_charge(name: str) -> int:
    """:func:`_charge`, remembered: a plan's few names are read thousands of times (each
    mixture's ionic strength), and the answer depends on the name alone. A name that is
    refused raises every time (errors are not remembered)."""
    return _charge(name)


def _charge(name: str) -> int:
    """The rules of :func:`charge_from_name`, without the size limit."""
    text = name.strip().translate(_MINUS_SIGNS)
    if not text:
        raise _bad_name(name, "the name is empty")

    # Rule 1a: a charge in superscripts at the end ("Fe³⁺", "SO₄²⁻").
    n_super = len(text) - len(text.rstrip(_SUPERSCRIPT_CHARS))
    if n_super:
        body = text[:-n_super].translate(_SUBSCRIPTS)
        return _explicit_charge(name, body, text[-n_super:].translate(_SUPERSCRIPTS))
    text = text.translate(_SUBSCRIPTS)

    # Rule 1b: a charge after the last caret or space.
    split_at = max((i for i, ch in enumerate(text) if ch == "^" or ch.isspace()), default=-1)
    if split_at >= 0:
        body = text[:split_at].rstrip()
        return _explicit_charge(name, body, text[split_at + 1 :].strip())

    signs = text[len(text.rstrip("+-")) :]
    rest = text[: len(text) - len(signs)]
    if not signs:
        _check_body(name, rest)
        return 0  # rule 5
    if len(set(signs)) > 1:
        raise _bad_name(name, "the charge mixes + and - signs")
    sign = signs[0]
    if len(signs) > 1:
        _check_body(name, rest)
        return len(signs) if sign == "+" else -len(signs)  # rule 2

    digits = rest[len(rest.rstrip("0123456789")) :]
    formula = rest[: len(rest) - len(digits)]
    _check_body(name, formula)
    if not digits:
        return _signed(name, 1, sign)
    if len(digits) >= 2:
        return _signed(name, int(digits[-1]), sign)  # rule 4, subscript then charge
    if formula.endswith(")"):
        return _signed(name, 1, sign)  # rule 3, a group count such as (SCN)2
    if any((formula + digits).endswith(ending) for ending in POLYATOMIC_SUBSCRIPT_ENDINGS):
        return _signed(name, 1, sign)  # rule 3, e.g. NO3-, FeSO4+
    return _signed(name, int(digits), sign)  # rule 4


def species_charge(formula: Mapping[str, int], component_charges: Mapping[str, int]) -> int:
    """Charge of a product species from its formula in components.

    Parameters
    ----------
    formula
        Stoichiometric coefficient of each component in the species [unitless], e.g.
        ``{"Fe3+": 1, "SCN-": 2}``; negative coefficients (a proton removed) are allowed.
    component_charges
        Charge number of each component [unitless], e.g. ``{"Fe3+": 3, "SCN-": -1}``.

    Returns
    -------
    int
        Charge number of the species, z = Σ n_j z_j [unitless].

    Raises
    ------
    InvalidInputError
        With field ``"formula.<component>"`` when a component has no known charge or a
        coefficient is not an integer.

    Notes
    -----
    Charge is conserved when components combine, so the species' charge is the
    coefficient-weighted sum of the components' charges (conservation of charge).

    Examples
    --------
    >>> species_charge({"Fe3+": 1, "SCN-": 2}, {"Fe3+": 3, "SCN-": -1})
    1
    """
    total = 0
    for component, coefficient in formula.items():
        if component not in component_charges:
            raise InvalidInputError(
                "the formula names a component whose charge is not known",
                field=f"formula.{component}",
                value=component,
                hint=f"use one of the components {sorted(component_charges)}",
            )
        if isinstance(coefficient, bool) or not isinstance(coefficient, int | np.integer):
            raise InvalidInputError(
                "a stoichiometric coefficient must be a whole number",
                field=f"formula.{component}",
                value=coefficient,
                hint="write integer coefficients such as 1 or 2",
            )
        total += int(coefficient) * int(component_charges[component])
    return total


def neutralised(contains_M: Mapping[str, float]) -> dict[str, float]:
    """A stock's ions plus the monovalent counter-ion that makes it electrically neutral.

    Parameters
    ----------
    contains_M
        Concentration of each listed ion [mol/L], keyed by name in the trade's notation.

    Returns
    -------
    dict[str, float]
        The listed ions in their order [mol/L], plus, when they leave a net charge
        concentration q = Σ c_i z_i [mol/L], :data:`COUNTER_ANION` at q (q > 0) or
        :data:`COUNTER_CATION` at -q (q < 0). When the stock already lists that counter-ion,
        its concentration is increased in place. A stock whose |q| is at most 1e-12 of
        Σ c_i |z_i| is taken as neutral (rounding of the listed values).

    Raises
    ------
    InvalidInputError
        With field ``"contains_M.<ion>"`` for a name :func:`charge_from_name` rejects or a
        concentration that is negative or not finite.

    Notes
    -----
    Electroneutrality of a solution, Σ c_i z_i = 0, as in Harris, Quantitative Chemical
    Analysis, 9th ed., 2016, section 8-5 "Charge balance" (from memory). The counter-ion is
    taken as monovalent (for example nitrate in a nitric acid medium), the usual choice when
    the stock's recipe does not name it (common practice).

    Examples
    --------
    >>> neutralised({"Fe3+": 0.25, "H+": 0.5})
    {'Fe3+': 0.25, 'H+': 0.5, 'X-': 1.25}
    """
    result: dict[str, float] = {}
    net_M = 0.0
    gross_M = 0.0
    for ion, concentration in contains_M.items():
        try:
            charge = charge_from_name(ion)
        except InvalidInputError as err:
            raise InvalidInputError(
                err.problem, field=f"contains_M.{ion}", value=ion, hint=err.hint
            ) from err
        value = float(concentration)
        if not math.isfinite(value) or value < 0.0:
            raise InvalidInputError(
                "a concentration must be a finite number, zero or more",
                field=f"contains_M.{ion}",
                value=concentration,
                hint="give the concentration in mol/L, e.g. 0.25",
            )
        result[ion] = value
        net_M += value * charge
        gross_M += value * abs(charge)
    if abs(net_M) <= 1e-12 * gross_M:
        return result
    counter = COUNTER_ANION if net_M > 0.0 else COUNTER_CATION
    result[counter] = result.get(counter, 0.0) + abs(net_M)
    return result


def ionic_strength_M(
    concentrations_M: ArrayLike, charges: Sequence[int] | ArrayLike
) -> NDArray[np.float64]:
    """Ionic strength of one or many solutions.

    Parameters
    ----------
    concentrations_M
        Concentration of each ion, shape (n, k) for n solutions and k ions, or (k,) for one
        solution [mol/L]. Values are used as given.
    charges
        Charge number of each ion, shape (k,) [unitless].

    Returns
    -------
    NDArray[np.float64]
        Ionic strength I, shape (n,), or 0-d for a (k,) input [mol/L].

    Raises
    ------
    InvalidInputError
        With field ``"charges"`` when the charges are not one per ion (last axis).

    Notes
    -----
    I = ½ Σ_i c_i z_i², the ionic strength on the amount-concentration scale.

    References
    ----------
    IUPAC, Compendium of Chemical Terminology (the "Gold Book"), entry "ionic strength, I",
    doi:10.1351/goldbook.I03180 (identifier from memory). Cohen et al., Quantities, Units and
    Symbols in Physical Chemistry (IUPAC Green Book), 3rd ed., RSC, 2007, section 2.13
    (section number from memory).

    Examples
    --------
    >>> float(ionic_strength_M([0.1, 0.1], [2, -2]))  # 0.1 mol/L MgSO4
    0.4
    """
    c_M = np.asarray(concentrations_M, dtype=float)
    z = np.asarray(charges, dtype=float)
    if z.ndim != 1 or c_M.ndim < 1 or c_M.shape[-1] != z.shape[0]:
        raise InvalidInputError(
            "there must be one charge per ion (the last axis of the concentrations)",
            field="charges",
            value=np.shape(charges),
            hint=f"give {c_M.shape[-1] if c_M.ndim else 'k'} charges for concentrations of "
            f"shape {c_M.shape}",
        )
    # Gold Book definition, I = 1/2 sum c_i z_i^2, as a matrix-vector product over the ions.
    return np.asarray(0.5 * (c_M @ (z * z)), dtype=float)


# Separators between a salt and its water of crystallisation: middle dot, bullet, full stop,
# asterisk, and the "+" and space that periodictable itself understands.
_HYDRATE_SEPARATOR = re.compile(r"\s*[·•∙⋅.*+]\s*|\s+")
# A formula part: an optional coefficient (decimal only here, "0.5H2O") and a formula body
# that runs up to the next separator.
_FORMULA_PART = re.compile(r"(?P<coefficient>[0-9]+(?:\.[0-9]+)?)?(?P<body>[^·•∙⋅.*+\s]*)")
_FORMULA_BODY = re.compile(r"^(?:[A-Z][a-z]?[0-9]*|[()0-9])+$")
_ZERO_COUNT = re.compile(r"(?<![0-9])0")
_COUNT = re.compile(r"[0-9]+")

_FORMULA_HINT = (
    "write element symbols with integer counts and parentheses, with any water of "
    "crystallisation as '(H2O)9', '·9H2O', '.9H2O' or '*9H2O', e.g. 'Fe(NO3)3·9H2O' or 'KSCN'"
)


_LIMITS_HINT = (
    f"check the formula for a typo: counts up to {MAX_FORMULA_COUNT}, at most "
    f"{MAX_FORMULA_ATOMS} atoms and {MAX_MOLAR_MASS_g_per_mol:g} g/mol, e.g. 'Fe(NO3)3·9H2O'"
)


def _bad_formula(formula: str, problem: str, hint: str = _FORMULA_HINT) -> InvalidInputError:
    return InvalidInputError(problem, field="formula", value=formula, hint=hint)


def _check_formula_body(formula: str, body: str) -> None:
    """Check one formula part: element symbols, integer counts, balanced parentheses."""
    if not body or not _FORMULA_BODY.match(body):
        raise _bad_formula(formula, f"the formula part {shown(body)} is not a chemical formula")
    depth = 0
    previous = ""
    for ch in body:
        if ch == "(":
            depth += 1
        elif ch == ")":
            if previous == "(":
                raise _bad_formula(formula, "the formula has empty parentheses")
            depth -= 1
            if depth < 0:
                raise _bad_formula(formula, "the formula has a ')' without its '('")
        elif ch.isdigit() and previous in ("", "("):
            raise _bad_formula(formula, "a count must follow an element symbol or a ')'")
        previous = ch
    if depth != 0:
        raise _bad_formula(formula, "the formula has a '(' without its ')'")
    if _ZERO_COUNT.search(body):
        raise _bad_formula(formula, "an element or group count cannot be zero")


def _canonical_formula(formula: str) -> str:
    """Rewrite a hydrate such as ``Fe(NO3)3·9H2O`` as ``Fe(NO3)3(H2O)9``.

    periodictable 2.1 reads ``"Fe(NO3)3.9H2O"`` as 3.9 nitrate groups and rejects ``·`` and
    ``*`` (its ``formula_grammar``), so the separators are resolved here and periodictable
    only sees element symbols, integer counts, parentheses and decimal group counts.
    """
    text = formula.strip()
    pieces: list[str] = []
    position = 0
    while True:
        part = _FORMULA_PART.match(text, position)
        if part is None:  # pragma: no cover - the pattern can match the empty string
            raise _bad_formula(formula, "the formula cannot be read")
        body = part["body"]
        _check_formula_body(formula, body)
        if part["coefficient"] is None:
            pieces.append(body)
        else:
            if position == 0 and part.end() == len(text):
                raise _bad_formula(formula, "the formula starts with a number")
            coefficient = float(part["coefficient"])
            if coefficient <= 0.0:
                raise _bad_formula(formula, "a hydrate coefficient must be positive")
            # Integer and fraction parts without leading zeros, so the count is exact.
            whole, _, fraction = part["coefficient"].partition(".")
            count = str(int(whole)) + (f".{fraction}" if fraction else "")
            pieces.append(f"({body}){count}")
        position = part.end()
        if position == len(text):
            return "".join(pieces)
        separator = _HYDRATE_SEPARATOR.match(text, position)
        if separator is None:  # pragma: no cover - a body stops only at a separator
            raise _bad_formula(formula, "the formula cannot be read")
        position = separator.end()


# One element symbol and its count, or a group's closing parenthesis and its count (decimal
# for a hydrate's water), in the canonical form _canonical_formula writes.
_SYMBOL_COUNT = re.compile(r"([A-Z][a-z]?)([0-9]*)")
_GROUP_COUNT = re.compile(r"[0-9]+(?:\.[0-9]+)?")
# A formula as periodictable structures one: (count, element symbol) and (count, [group])
# pairs.
_Structure = list[tuple[float, Any]]


def element_symbols(name: str) -> frozenset[str]:
    """The element symbols a species name is written with, read as formulas are: a capital
    and an optional small letter (``"Co"`` in ``"Co2+"``, but C and O in ``"CO3 2-"``).

    Not checked against the periodic table: a placeholder such as ``"M2+"`` gives ``{"M"}``.
    """
    return frozenset(symbol for symbol, _ in _SYMBOL_COUNT.findall(name))


def _structure(canonical: str) -> _Structure:
    """Nested (count, element symbol or group) pairs of a canonical formula, in the order
    written.

    The canonical form (element symbols with integer counts, parentheses, decimal group
    counts) is read here, as periodictable's formula parser reads it, without its grammar
    library (pyparsing), which cost more to import than the rest of ``planner plan`` reading
    a plan file. An unknown symbol raises ValueError.
    """
    groups: list[_Structure] = [[]]
    position = 0
    while position < len(canonical):
        if canonical[position] == "(":
            groups.append([])
            position += 1
        elif canonical[position] == ")":
            group = groups.pop()
            count = _GROUP_COUNT.match(canonical, position + 1)
            number: float = 1
            if count is not None:
                text = count.group()
                number = float(text) if "." in text else int(text)
                position = count.end()
            else:
                position += 1
            groups[-1].append((number, group))
        else:
            atom = _SYMBOL_COUNT.match(canonical, position)
            if atom is None:  # pragma: no cover - _check_formula_body admits nothing else
                raise ValueError(canonical[position:])
            if atom[1] not in ATOMIC_WEIGHTS:
                raise ValueError(f"unknown element {atom[1]}")
            groups[-1].append((int(atom[2]) if atom[2] else 1, atom[1]))
            position = atom.end()
    return groups[0]


def _count_atoms(structure: _Structure) -> dict[str, float]:
    """Atoms of each element, in order of first appearance, as periodictable counts them
    (``periodictable.formulas``), so the mass below is its sum, term for term."""
    total: dict[str, float] = {}
    for count, fragment in structure:
        partial = _count_atoms(fragment) if isinstance(fragment, list) else {fragment: 1}
        for atom, atom_count in partial.items():
            total[atom] = total.get(atom, 0) + atom_count * count
    return total


def _mass(atoms: dict[str, float]) -> float:
    """Σ n_E A_r(E), summed in the order of ``atoms`` as periodictable's ``Formula.mass``."""
    mass = 0.0
    for element, count in atoms.items():
        mass += ATOMIC_WEIGHTS[element] * count
    return mass


@functools.lru_cache(maxsize=256)
def molar_mass_g_per_mol(formula: str) -> float:
    """Molar mass of a compound, hydrate water included.

    Parameters
    ----------
    formula
        Chemical formula, e.g. ``"KSCN"``, ``"Fe(NO3)3(H2O)9"``, ``"Fe(NO3)3·9H2O"``,
        ``"Fe(NO3)3.9H2O"`` or ``"CuSO4*5H2O"``. A hydrate coefficient may be decimal
        (``"CaSO4·0.5H2O"``); counts inside a formula are integers.

    Returns
    -------
    float
        Molar mass [g/mol].

    Raises
    ------
    InvalidInputError
        With field ``"formula"`` for an empty formula, an unknown element symbol, unbalanced
        parentheses, a zero count, any character that is not part of a formula, or a formula
        beyond the limits of a solid to weigh out: a count above :data:`MAX_FORMULA_COUNT`,
        more than :data:`MAX_FORMULA_ATOMS` atoms or a molar mass above
        :data:`MAX_MOLAR_MASS_g_per_mol`.

    Notes
    -----
    M = Σ n_E A_r(E) × 1 g/mol, with the relative atomic masses A_r of
    :data:`planner.chem.atomic_weights.ATOMIC_WEIGHTS`, the IUPAC 2021 standard atomic
    weights (abridged values for elements given as intervals). The text is parsed here, as
    periodictable's own formula parser would read its canonical form of element symbols,
    integer counts and parentheses, and summed as periodictable sums a formula's mass (the
    tests compare the two).

    References
    ----------
    T. Prohaska et al., Standard atomic weights of the elements 2021 (IUPAC Technical
    Report), Pure Appl. Chem. 94 (2022) 573-600, doi:10.1515/pac-2019-0603.

    Examples
    --------
    >>> round(molar_mass_g_per_mol("KSCN"), 2)
    97.18
    """
    if not isinstance(formula, str) or not formula.strip():
        raise _bad_formula(str(formula), "the formula is empty")
    for count in _COUNT.findall(formula):
        # The digits' length first: int() of thousands of digits fails (found by fuzzing).
        if len(count.lstrip("0")) > len(str(MAX_FORMULA_COUNT)) or int(count) > MAX_FORMULA_COUNT:
            raise _bad_formula(
                formula, f"a count in the formula is larger than {MAX_FORMULA_COUNT}", _LIMITS_HINT
            )
    canonical = _canonical_formula(formula)
    try:
        atoms = _count_atoms(_structure(canonical))
    except ValueError as err:  # unknown element symbol
        raise _bad_formula(formula, f"the formula names an unknown element ({err})") from err
    # Counted before the mass: nested groups multiply counts beyond float range.
    too_many = sum(atoms.values()) > MAX_FORMULA_ATOMS
    mass = math.inf if too_many else _mass(atoms)
    if too_many:
        raise _bad_formula(
            formula,
            f"the formula has more than the {MAX_FORMULA_ATOMS} atoms a solid to weigh out may "
            "have",
            _LIMITS_HINT,
        )
    if not math.isfinite(mass) or mass <= 0.0:
        raise _bad_formula(formula, "the formula has no mass")
    if mass > MAX_MOLAR_MASS_g_per_mol:
        raise _bad_formula(
            formula,
            f"the molar mass is {mass:.4g} g/mol, above the {MAX_MOLAR_MASS_g_per_mol:g} g/mol "
            "a solid to weigh out may have",
            _LIMITS_HINT,
        )
    return mass
