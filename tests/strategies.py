"""Shared hypothesis strategies: plan files built from valid pieces, in physical ranges.

Everything here is invented for the tests (our own stocks, glassware and constants). The
ranges are physical ones, not the widest the plan file accepts:

- formation constants K of the coloured 1:1 product from 1e-2 to 1e12 L/mol, written either as
  ``K`` or as ``log_beta``;
- stock concentrations from 1e-8 to 5 mol/L;
- shelves of one to thirty distinct devices whose kinds and sizes appear in the tolerance
  tables of :mod:`planner.lab.tolerances`, so that no device lacks a tolerance.

:func:`plan_dicts` draws a plan as the nested ``dict`` that :func:`tomllib.loads` would give;
:func:`toml_text` writes such a dict as TOML text (no third-party TOML writer is needed for
the small subset the plan files use: numbers, booleans, strings, lists and tables).
:func:`key_paths` lists every key path of a plan dict in the dotted notation that
:class:`planner.errors.PlanFileError` uses (``stocks[1].contains_M.Fe3+``), so tests can
check that a message names the key at fault.
"""

from __future__ import annotations

import copy
import math
import re
from collections.abc import Iterator, Mapping
from typing import Any

from hypothesis import settings
from hypothesis import strategies as st

__all__ = [
    "CI_EXAMPLES",
    "CONCENTRATION_RANGE_M",
    "K_RANGE",
    "budget",
    "concentrations_M",
    "formation_constants",
    "get_at",
    "key_paths",
    "path_text",
    "plan_dicts",
    "set_at",
    "shelves",
    "toml_text",
]

#: Stock concentrations drawn by :func:`concentrations_M` [mol/L].
CONCENTRATION_RANGE_M = (1e-8, 5.0)
#: Formation constants of the 1:1 product drawn by :func:`formation_constants` [L/mol].
K_RANGE = (1e-2, 1e12)

#: Examples per property in the ``ci`` profile of tests/conftest.py (``long``: 20x as many).
CI_EXAMPLES = 100
#: Share of its nominal count a fuzz property runs under ``ci``, the bounded profile that
#: keeps the whole suite within 4 minutes of CPU on a 2-core machine (the fuzz properties,
#: each a whole plan or command per example, were half of the suite's time at full count; at
#: this share they are about an eighth of it, 35 s; ``long`` runs 20 times the nominal count).
FUZZ_CI_SHARE = 0.10


def budget(examples: int) -> int:
    """A fuzz property's example count in the loaded hypothesis profile.

    ``examples`` is the property's nominal count: under ``ci`` it runs
    :data:`FUZZ_CI_SHARE` of it, under any other profile the count scaled by that profile's
    ``max_examples`` (twenty times ``examples`` under ``long``).

    Call it at import time of a test module (tests/conftest.py has loaded the profile).
    """
    scale = settings().max_examples / CI_EXAMPLES
    return max(1, round(examples * (FUZZ_CI_SHARE if scale == 1 else scale)))


# ---------------------------------------------------------------------------------------------
# A small TOML writer (TOML 1.0 subset: what plan files use)
# ---------------------------------------------------------------------------------------------

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")
_ESCAPES = {'"': '\\"', "\\": "\\\\", "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f"}
_ESCAPES["\r"] = "\\r"


def _string(text: str) -> str:
    """A TOML basic string; control characters (not allowed raw) as \\uXXXX escapes."""
    out = []
    for char in text:
        if char in _ESCAPES:
            out.append(_ESCAPES[char])
        elif ord(char) < 0x20 or ord(char) == 0x7F:
            out.append(f"\\u{ord(char):04X}")
        else:
            out.append(char)
    return '"' + "".join(out) + '"'


def _key(name: str) -> str:
    return name if _BARE_KEY.fullmatch(name) else _string(name)


def _value(value: Any) -> str:
    """One value written inline (lists and tables on one line)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        # repr gives the shortest text that reads back as the same float; TOML needs a
        # fraction or an exponent, which repr always has for floats ("1.0", "1e-08").
        return repr(value)
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, Mapping):
        items = ", ".join(f"{_key(k)} = {_value(v)}" for k, v in value.items() if v is not None)
        return "{ " + items + " }" if items else "{}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    raise TypeError(f"cannot write {type(value).__name__} as TOML")


def _is_table_list(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, Mapping) for v in value)


def _inline(value: Any, prefix: str) -> bool:
    """Whether a value is written on its key's line (``formula = { ... }``, ``[1, 2]``)."""
    if isinstance(value, Mapping):
        # A table of plain values reads best inline only below the top level; top-level
        # sections get their own [header].
        return bool(prefix) and all(not isinstance(v, (Mapping, list)) for v in value.values())
    return not _is_table_list(value)


def _table(table: Mapping[str, Any], prefix: str, lines: list[str]) -> None:
    """Inline values first (a key after a [header] belongs to that header), then sub-tables
    as [a.b] and lists of tables as [[a.b]]."""
    for key, value in table.items():
        if value is not None and _inline(value, prefix):
            lines.append(f"{_key(key)} = {_value(value)}")
    for key, value in table.items():
        if value is None or _inline(value, prefix):
            continue
        name = f"{prefix}.{_key(key)}" if prefix else _key(key)
        if isinstance(value, Mapping):
            lines.append("")
            lines.append(f"[{name}]")
            _table(value, name, lines)
        else:
            for entry in value:
                lines.append("")
                lines.append(f"[[{name}]]")
                _table(entry, name, lines)


def toml_text(document: Mapping[str, Any]) -> str:
    """Write a plan dict as TOML text.

    ``None`` values are left out (TOML has no null). Floats keep every digit (``repr``);
    ``nan`` and ``inf`` are written as TOML's ``nan`` and ``inf``.
    """
    lines: list[str] = []
    _table(document, "", lines)
    return "\n".join(lines).lstrip("\n") + "\n"


# ---------------------------------------------------------------------------------------------
# Key paths: where a value sits in a plan dict
# ---------------------------------------------------------------------------------------------

Path = tuple[str | int, ...]


def path_text(path: Path) -> str:
    """A key path in PlanFileError notation: ('stocks', 1, 'id') -> 'stocks[1].id'."""
    text = ""
    for part in path:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text = f"{text}.{part}" if text else part
    return text


def key_paths(document: Any, prefix: Path = ()) -> Iterator[tuple[Path, Any]]:
    """Every (path, value) of a nested dict/list document, tables and lists included."""
    if isinstance(document, Mapping):
        for key, value in document.items():
            if value is None:
                continue
            yield (*prefix, key), value
            yield from key_paths(value, (*prefix, key))
    elif isinstance(document, list):
        for index, value in enumerate(document):
            yield (*prefix, index), value
            yield from key_paths(value, (*prefix, index))


def get_at(document: Any, path: Path) -> Any:
    for part in path:
        document = document[part]
    return document


def set_at(document: Any, path: Path, value: Any) -> None:
    """Replace the value at ``path`` (the document is changed in place)."""
    get_at(document, path[:-1])[path[-1]] = value


# ---------------------------------------------------------------------------------------------
# Physical quantities
# ---------------------------------------------------------------------------------------------


def _log_uniform(low: float, high: float) -> st.SearchStrategy[float]:
    """Values spread evenly in log10 between low and high, ends included."""
    return st.floats(math.log10(low), math.log10(high)).map(
        lambda exponent: min(high, max(low, 10.0**exponent))
    )


def concentrations_M() -> st.SearchStrategy[float]:
    """Stock concentrations from 1e-8 to 5 mol/L, log-uniform, with the ends themselves."""
    low, high = CONCENTRATION_RANGE_M
    return st.one_of(st.sampled_from((low, high)), _log_uniform(low, high))


def formation_constants() -> st.SearchStrategy[float]:
    """Formation constants of a 1:1 product from 1e-2 to 1e12 L/mol, ends included."""
    low, high = K_RANGE
    return st.one_of(st.sampled_from((low, high)), _log_uniform(low, high))


# ---------------------------------------------------------------------------------------------
# Glassware
# ---------------------------------------------------------------------------------------------

# Sizes that the default (ISO) tolerance tables of planner.lab.tolerances hold [mL]; piston
# pipettes as (low, high, step) [µL] with a nominal volume of ISO 8655-2 Table 1.
_TABLE_SIZES_mL = {
    "transfer-pipette": (0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 25.0, 50.0, 100.0),
    "graduated-pipette": (1.0, 2.0, 5.0, 10.0, 25.0),
    "buret": (5.0, 10.0, 25.0, 50.0, 100.0),
    "volumetric-flask": (5.0, 10.0, 20.0, 25.0, 50.0, 100.0, 200.0, 250.0, 500.0, 1000.0),
    "graduated-cylinder": (5.0, 10.0, 25.0, 50.0, 100.0, 250.0, 500.0, 1000.0),
}
_PISTON_SETTINGS_uL = (
    (0.5, 10.0, 0.1),
    (2.0, 20.0, 0.2),
    (10.0, 100.0, 1.0),
    (20.0, 200.0, 1.0),
    (100.0, 1000.0, 5.0),
    (500.0, 5000.0, 50.0),
    (1000.0, 10000.0, 100.0),
)
_DELIVERING = frozenset(
    {"transfer-pipette", "graduated-pipette", "buret", "piston-pipette", "graduated-cylinder"}
)


def _device_catalogue() -> list[dict[str, Any]]:
    """Every distinct device of the tables, as plan-file [[glassware]] entries (no count)."""
    devices: list[dict[str, Any]] = []
    for kind, sizes in _TABLE_SIZES_mL.items():
        for size in sizes:
            for device_class in ("A", "B"):
                devices.append({"kind": kind, "volume_mL": size, "class": device_class})
    for low, high, step in _PISTON_SETTINGS_uL:
        devices.append({"kind": "piston-pipette", "range_uL": [low, high], "step_uL": step})
    return devices


_CATALOGUE = _device_catalogue()


def _device_key(entry: Mapping[str, Any]) -> tuple[str, float]:
    """What makes two entries the same device id: kind and size (class does not count)."""
    if entry["kind"] == "piston-pipette":
        return entry["kind"], entry["range_uL"][1] / 1000.0
    return entry["kind"], float(entry["volume_mL"])


@st.composite
def shelves(
    draw: st.DrawFn, *, min_devices: int = 1, max_devices: int = 30, max_tube_mL: float = 100.0
) -> list[dict[str, Any]]:
    """A shelf of distinct devices as [[glassware]] entries, at least one delivering.

    Every kind and size is in the tolerance tables. With ``max_devices`` = 30 the shelf can
    be as full as a well-stocked bench; tubes are added by :func:`plan_dicts`, which knows
    the mixture volume they must hold.
    """
    entries = draw(
        st.lists(
            st.sampled_from(_CATALOGUE),
            min_size=min_devices,
            max_size=max_devices,
            unique_by=_device_key,
        )
    )
    if not any(entry["kind"] in _DELIVERING for entry in entries):
        # Replace the first device by a delivering one (the shelf must deliver something).
        delivering = [d for d in _CATALOGUE if d["kind"] in _DELIVERING]
        keys = {_device_key(e) for e in entries[1:]}
        replacement = draw(st.sampled_from([d for d in delivering if _device_key(d) not in keys]))
        entries = [replacement, *entries[1:]]
    shelf = []
    for entry in entries:
        # A deep copy: tests mutate the drawn plan (range_uL lists included), and the
        # catalogue entries must stay as they are for the next example.
        device = copy.deepcopy(entry)
        device["count"] = draw(st.integers(1, 4))
        if device["kind"] in {"graduated-pipette", "buret"} and draw(st.booleans()):
            # A coarser reading resolution than the default, as some labs read burets.
            device["division_mL"] = draw(st.sampled_from((0.05, 0.1)))
        shelf.append(device)
    return shelf


# ---------------------------------------------------------------------------------------------
# Whole plans
# ---------------------------------------------------------------------------------------------

# Reaction systems: (metal, ligand, 1:1 product, 1:2 product, metal solid, ligand solid,
# counter-ion of the metal stock, counter-ion of the ligand stock). Names in the trade's
# notation; the generic ones (M2+, Y-) are as valid as the real ions (X- and X+ are reserved
# for the planner's unnamed counter-ions).
_SYSTEMS = (
    ("Fe3+", "SCN-", "FeSCN2+", "Fe(SCN)2+", "Fe(NO3)3(H2O)9", "KSCN", "NO3-", "K+"),
    ("Cu2+", "L-", "CuL+", "CuL2", "Cu(ClO4)2(H2O)6", None, "ClO4-", "Na+"),
    ("Ni2+", "L", "NiL2+", "NiL22+", "NiCl2(H2O)6", None, "Cl-", None),
    ("M2+", "Y-", "MY+", "MY2", None, None, "NO3-", "Na+"),
)
_MEDIA = (("H+", "NO3-"), ("Na+", "Cl-"), ("H+", "ClO4-"))
_TITLES = st.text(
    alphabet=st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), max_size=60
).filter(lambda t: not re.search(r"(?i)\b(nan|inf|infinity)\b", t))


def _constant(draw: st.DrawFn, K: float) -> dict[str, float]:
    """A constant as the plan file gives it: K itself or log_beta = log10 K."""
    if draw(st.booleans()):
        return {"K": K}
    return {"log_beta": math.log10(K)}


def _stock(
    draw: st.DrawFn,
    stock_id: str,
    ion: str,
    concentration_M: float,
    counter_ion: str | None,
    medium: tuple[str, str],
    solid: str | None,
) -> dict[str, Any]:
    contains: dict[str, float] = {ion: concentration_M}
    if counter_ion is not None and counter_ion not in contains and draw(st.booleans()):
        contains[counter_ion] = concentration_M
    medium_M = draw(st.sampled_from((0.1, 0.5, 1.0)))
    for medium_ion in medium:
        contains.setdefault(medium_ion, medium_M)
    stock: dict[str, Any] = {
        "id": stock_id,
        "contains_M": contains,
        "relative_uncertainty": draw(st.sampled_from((0.0, 0.001, 0.003, 0.01, 0.05))),
    }
    if draw(st.booleans()):
        stock["available_mL"] = draw(st.sampled_from((50.0, 500, 2000, 1e5)))
    if solid is not None and draw(st.booleans()):
        stock["solid"] = {"formula": solid, "purity": draw(st.sampled_from((1.0, 0.99, 0.95)))}
    return stock


@st.composite
def plan_dicts(
    draw: st.DrawFn,
    *,
    min_devices: int = 1,
    max_devices: int = 30,
    max_tests: int = 8,
) -> dict[str, Any]:
    """A valid plan file as a dict: every cross-key rule of the plan file holds.

    Physical ranges: K of the 1:1 product 1e-2 to 1e12 L/mol (an optional 1:2 product with a
    stepwise constant 1e-2 to 1e3 L/mol), molar absorptivities 10 to 1e5 L mol-1 cm-1, stock
    concentrations 1e-8 to 5 mol/L, mixture volumes 0.5 to 100 mL, one to thirty devices.
    The plan may well be infeasible (nothing in the window, too little stock): that is for the
    planner to say with failed checks.
    """
    metal, ligand, product, product2, metal_solid, ligand_solid, metal_counter, ligand_counter = (
        draw(st.sampled_from(_SYSTEMS))
    )
    medium = draw(st.sampled_from(_MEDIA))
    K1 = draw(formation_constants())
    species = [
        {
            "name": product,
            "formula": {metal: 1, ligand: 1},
            **_constant(draw, K1),
            "epsilon": draw(_log_uniform(10.0, 1e5)),
        }
    ]
    if draw(st.booleans()):
        K2 = draw(_log_uniform(1e-2, 1e3))
        species.append(
            {
                "name": product2,
                "formula": {metal: 1, ligand: 2},
                **_constant(draw, K1 * K2),
                "epsilon": draw(st.sampled_from((0.0, 100.0, 2000.0))),
            }
        )
    reaction: dict[str, Any] = {
        "temperature_C": draw(st.sampled_from((20, 25.0, 37))),
        "ionic_strength_M": draw(st.sampled_from((0.0, 0.1, 0.5, 1.0))),
        "components": [metal, ligand],
        "species": species,
    }
    if draw(st.booleans()):
        reaction["component_epsilon"] = {metal: draw(st.sampled_from((0.0, 5.0, 50.0)))}

    # Vessel and volume first: the tubes, the cuvette and the flask depend on them.
    use_flask = draw(st.booleans())
    if use_flask:
        flask_mL = draw(st.sampled_from((5.0, 10.0, 25.0, 50.0, 100.0)))
        total_mL = flask_mL
        vessel = f"flask-{flask_mL:g}"
    else:
        total_mL = draw(st.sampled_from((0.5, 1.0, 2.0, 5.0, 10.0, 25.0, 50.0, 100.0)))
        vessel = "tube"

    low = draw(st.sampled_from((0.0, 0.05, 0.1, 0.2)))
    high = draw(st.sampled_from((0.6, 0.9, 1.0, 1.5, 2.0)))
    instrument = {
        "wavelength_nm": draw(st.integers(200, 900)),
        "path_length_cm": draw(st.sampled_from((0.1, 0.5, 1.0, 2.0, 5.0, 10.0))),
        "absorbance_window": [low, high],
        "absorbance_sd": draw(st.sampled_from((1e-4, 0.001, 0.003, 0.01))),
        "stray_light": draw(st.sampled_from((0.0, 0.0005, 0.001, 0.01))),
        "cuvette_fill_mL": total_mL * draw(st.sampled_from((0.1, 0.3, 0.5, 1.0))),
    }

    limiting_is_ligand = draw(st.booleans())
    stocks = [
        _stock(draw, "metal", metal, draw(concentrations_M()), metal_counter, medium, metal_solid),
        _stock(
            draw, "ligand", ligand, draw(concentrations_M()), ligand_counter, medium, ligand_solid
        ),
    ]
    if draw(st.booleans()):
        # A dilute stock of the limiting reagent, as many labs keep.
        ion = ligand if limiting_is_ligand else metal
        source = stocks[1] if limiting_is_ligand else stocks[0]
        dilute_M = max(CONCENTRATION_RANGE_M[0], source["contains_M"][ion] / 10.0)
        counter = ligand_counter if limiting_is_ligand else metal_counter
        solid = ligand_solid if limiting_is_ligand else metal_solid
        stocks.append(_stock(draw, "dilute", ion, dilute_M, counter, medium, solid))
    if use_flask or draw(st.integers(0, 3)) > 0:
        medium_M = draw(st.sampled_from((0.1, 0.5, 1.0)))
        diluent: dict[str, Any] = {
            "id": "medium",
            "contains_M": {medium[0]: medium_M, medium[1]: medium_M},
            "diluent": True,
        }
        if draw(st.booleans()):
            diluent["available_mL"] = draw(st.sampled_from((100.0, 5000.0)))
        stocks.append(diluent)
    stocks = draw(st.permutations(stocks))

    glassware = draw(shelves(min_devices=min_devices, max_devices=max_devices))
    if not use_flask and draw(st.booleans()):
        glassware.append(
            {
                "kind": "tube",
                "volume_mL": total_mL * draw(st.sampled_from((1.0, 1.5, 2.0))),
                "count": draw(st.integers(1, 20)),
            }
        )

    range_low = draw(st.sampled_from((0.05, 0.15, 0.2, 0.3)))
    range_high = draw(st.sampled_from((0.7, 0.8, 0.85, 0.95)))
    design: dict[str, Any] = {
        "standards": draw(st.integers(1, 8)),
        "tests": draw(st.integers(1, max_tests)),
        "limiting": ligand if limiting_is_ligand else metal,
        "assumption_tolerance": draw(st.sampled_from((0.001, 0.01, 0.02, 0.05, 0.2))),
        "vessel": vessel,
        "total_volume_mL": total_mL,
        "bound_fraction_range": [range_low, range_high],
        "bound_fraction_span": (range_high - range_low) * draw(st.sampled_from((0.1, 0.5, 1.0))),
        "ionic_strength_spread": draw(st.sampled_from((0.0, 0.25, 0.5, 1.0))),
        "blanks": draw(st.integers(1, 3)),
    }
    if len(species) > 1 and species[1]["epsilon"] > 0:
        # Two absorbing products: the plan file must say whose K is measured.
        design["measured_species"] = species[draw(st.integers(0, 1))]["name"]
    session = {
        "sections": draw(st.sampled_from((1, 3, 20, 1000))),
        "benches_per_section": draw(st.sampled_from((1, 12, 1000))),
        "replicates": draw(st.integers(1, 3)),
        "margin": draw(st.sampled_from((0.0, 0.15, 1.0))),
        "dead_volume_mL": draw(st.sampled_from((0.0, 5.0, 50.0))),
    }
    return {
        "title": draw(_TITLES),
        "reaction": reaction,
        "instrument": instrument,
        "stocks": stocks,
        "glassware": glassware,
        "design": design,
        "session": session,
    }
