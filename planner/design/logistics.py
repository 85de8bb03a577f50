"""Prep-room logistics: stock volumes per bench, section and session, and how to make them.

to_prepare = session x (1 + margin) + dead volume x bench containers + what making the other
stocks takes of it. The dead volume is what stays unusable in each bench's container of a
stock (the bottom of a beaker a pipette cannot reach, the tip and stopcock of a buret):
``session.dead_volume_mL`` per stock and bench (common practice: 5 mL for a beaker with a
pipette, more for a buret's reservoir).

Making the stocks takes some of them: every stock made in the prep room is made up to the
mark of its flasks with the medium (the diluent stock), taken as the flasks' whole volume
less any aliquot (the solid's own volume neglected, so the medium is never short: common
practice); and a stock listed without a solid that is the same solution as a stronger stock of
the shelf, diluted with the medium, is made from it by dilution: an aliquot a V of the source
per flask of volume V, with a the fraction c_target = a c_source + (1 - a) c_medium of every
listed ion (conservation of amount on dilution; Harris, Quantitative Chemical Analysis, 9th
ed., 2016, eq. 1-5). Those volumes are added to the medium's and the source's to_prepare.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Mapping, Sequence
from typing import Any

from planner.chem.mixing import medium_label
from planner.chem.species import molar_mass_g_per_mol
from planner.inputs import PlanInputs, Stock
from planner.lab.glassware import stock_flasks
from planner.result import Mixture, StockPreparation, Totals

__all__ = [
    "combined_totals",
    "dilution_recipes",
    "preparations",
    "stock_totals",
]


def stock_totals(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Totals:
    """Volume of every stock per bench, section, session and to prepare.

    Parameters
    ----------
    inputs
        The plan (session settings).
    mixtures
        One bench's full set of mixtures.

    Returns
    -------
    Totals
        Volumes [mL]; every stock appears, with 0 when unused.
    """
    session = inputs.session
    per_bench = {st.id: sum(m.volume_of(st.id) for m in mixtures) for st in inputs.stocks}
    per_section = {
        k: v * session.benches_per_section * session.replicates for k, v in per_bench.items()
    }
    total = {k: v * session.sets for k, v in per_bench.items()}
    containers = session.sections * session.benches_per_section
    to_prepare = {
        k: (v * (1.0 + session.margin) + session.dead_volume_mL * containers) if v > 0 else 0.0
        for k, v in total.items()
    }
    return _with_stock_making(
        inputs,
        Totals(
            per_bench=per_bench,
            per_section=per_section,
            session=total,
            to_prepare=to_prepare,
            dead_volume_mL=session.dead_volume_mL,
        ),
    )


def _with_stock_making(inputs: PlanInputs, totals: Totals) -> Totals:
    """``totals`` (whose to_prepare is for the mixtures alone) with what making the stocks
    takes: each dilution's aliquots added to its source, then the medium of every flask made
    added to the diluent (module notes)."""
    for_mixtures = totals.to_prepare
    recipes = dilution_recipes(inputs)
    extra: dict[str, float] = defaultdict(float)
    for target, (source, fraction) in recipes.items():
        volume = for_mixtures.get(target, 0.0)
        if volume > 0:
            flask_mL, flasks = stock_flasks(volume)
            extra[source] += flasks * fraction * flask_mL
    diluent = inputs.diluent
    if diluent is not None:
        for stock in inputs.stocks:
            volume = for_mixtures.get(stock.id, 0.0) + extra.get(stock.id, 0.0)
            made_here = stock.solid is not None or stock.id in recipes
            if stock.diluent or volume <= 0 or not made_here:
                continue  # the medium itself, unused, or supplied ready-made
            flask_mL, flasks = stock_flasks(volume)
            aliquot_mL = recipes[stock.id][1] * flask_mL if stock.id in recipes else 0.0
            extra[diluent.id] += flasks * (flask_mL - aliquot_mL)
    for_stocks = {k: v for k, v in extra.items() if v > 0}
    return Totals(
        per_bench=totals.per_bench,
        per_section=totals.per_section,
        session=totals.session,
        to_prepare={k: v + for_stocks.get(k, 0.0) for k, v in for_mixtures.items()},
        dead_volume_mL=totals.dead_volume_mL,
        for_stocks=for_stocks,
    )


# Relative agreement asked of every listed ion of a dilution, c_target = a c_source +
# (1 - a) c_medium: concentrations are typed to three or four digits, so 1e-3 accepts their
# rounding and no real difference of composition (common practice).
_DILUTION_RTOL = 1e-3


def _dilution_fraction(
    target: Mapping[str, float],
    source: Mapping[str, float],
    medium: Mapping[str, float],
    components: Sequence[str],
) -> float | None:
    """The fraction a of ``source`` in ``target`` when target = a source + (1 - a) medium
    for every listed ion, with 0 < a < 1; else None. a is set by the first reaction
    component (else ion) in which source and medium differ."""
    ions = sorted(set(target) | set(source) | set(medium), key=lambda i: (i not in components, i))
    fraction = None
    for ion in ions:
        s_M, m_M = source.get(ion, 0.0), medium.get(ion, 0.0)
        if s_M != m_M:
            fraction = (target.get(ion, 0.0) - m_M) / (s_M - m_M)
            break
    if fraction is None or not 0.0 < fraction < 1.0 - _DILUTION_RTOL:
        return None
    for ion in ions:
        s_M, m_M, t_M = source.get(ion, 0.0), medium.get(ion, 0.0), target.get(ion, 0.0)
        if abs(fraction * s_M + (1.0 - fraction) * m_M - t_M) > _DILUTION_RTOL * max(s_M, m_M, t_M):
            return None
    return fraction


def dilution_recipes(inputs: PlanInputs) -> dict[str, tuple[str, float]]:
    """Which stocks without a solid are made by diluting another stock of the shelf.

    Parameters
    ----------
    inputs
        The plan (its stocks and diluent).

    Returns
    -------
    dict
        stock id -> (source stock id, fraction a of the source per flask [unitless]). A
        source is a stock with a solid, or one without that no other stock can make (supplied
        ready-made), so no recipe depends on another; among several sources the one with
        the largest aliquot (the weakest) is taken, the first in plan order on a tie. Stocks
        without a solid that no source makes are absent: they must be supplied.
    """
    diluent = inputs.diluent
    medium = diluent.contains_M if diluent is not None else {}
    components = inputs.reaction.components
    stocks = [st for st in inputs.stocks if not st.diluent]

    def sources(stock: Stock) -> list[tuple[Stock, float]]:
        found = []
        for source in stocks:
            if source.id == stock.id:
                continue
            fraction = _dilution_fraction(stock.contains_M, source.contains_M, medium, components)
            if fraction is not None:
                found.append((source, fraction))
        return found

    roots = {st.id for st in stocks if st.solid is not None or not sources(st)}
    recipes: dict[str, tuple[str, float]] = {}
    for stock in stocks:
        if stock.solid is not None:
            continue
        options = [(source, a) for source, a in sources(stock) if source.id in roots]
        if options:
            source, fraction = max(options, key=lambda option: option[1])
            recipes[stock.id] = (source.id, fraction)
    return recipes


def preparations(inputs: PlanInputs, totals: Totals) -> tuple[StockPreparation, ...]:
    """How to make every stock the session uses.

    The mass of solid for one flask is m = c V M / purity (amount c V of the provided ion,
    one formula unit per ion; Harris, Quantitative Chemical Analysis, 9th ed., 2016, ch. 1).

    Parameters
    ----------
    inputs
        The plan (stocks with their solids).
    totals
        Volumes to prepare [mL].

    Returns
    -------
    tuple of StockPreparation
        One per stock with a positive volume to prepare, in plan order.
    """
    medium = medium_label(inputs.diluent)
    recipes = dilution_recipes(inputs)
    result = []
    for stock in inputs.stocks:
        volume = totals.to_prepare.get(stock.id, 0.0)
        if stock.diluent and stock.medium_salt_M > 0:
            # What makes up the other stocks is the medium before its salt (medium_label):
            # only the benches' share of a salted diluent is weighed and flasked here. A
            # dilution's source is salted whole: its aliquots carry their salt (_salt).
            volume -= totals.for_stocks.get(stock.id, 0.0)
        if volume > 0:
            result.append(_preparation(inputs, stock, volume, medium, recipes.get(stock.id)))
    return tuple(result)


def _preparation(
    inputs: PlanInputs,
    stock: Stock,
    volume_mL: float,
    medium: str,
    dilution: tuple[str, float] | None,
) -> StockPreparation:
    """How to make ``volume_mL`` of one stock: from the source of its ``dilution`` (source id,
    fraction), from its solid, or, with neither, supplied ready-made (nothing weighed)."""
    flask_mL, flasks = stock_flasks(volume_mL)
    reagent = next((ion for ion in stock.contains_M if ion in inputs.reaction.components), "")
    solid = stock.solid if dilution is None else None
    source, fraction = dilution if dilution is not None else ("", 0.0)
    if solid is not None:
        provides = solid.provides or reagent or next(iter(stock.contains_M))
    else:
        provides = reagent if dilution is not None else ""
    concentration = stock.contains_M[provides] if provides else 0.0
    molar_mass = molar_mass_g_per_mol(solid.formula) if solid is not None else 0.0
    purity = solid.purity if solid is not None else 1.0
    return StockPreparation(
        stock=stock.id,
        flask_mL=flask_mL,
        flasks=flasks,
        solid_formula=solid.formula if solid is not None else "",
        molar_mass_g_per_mol=molar_mass,
        purity=purity,
        # m = c V M / purity (see preparations); 0 when nothing is weighed.
        mass_g=concentration * flask_mL / 1000.0 * molar_mass / purity,
        provides=provides,
        concentration_M=concentration,
        # A stock made neither from a solid nor by dilution is supplied ready-made and takes
        # no medium (the diluent among them is the medium itself): its label names none.
        medium="" if solid is None and not source else medium,
        source=source,
        # To the nanolitre: a pipetted aliquot of 200.0 mL, not 199.99999999999997.
        aliquot_mL=round(fraction * flask_mL, 6),
        **_salt(inputs, stock, flask_mL, dilution),
    )


def _salt(
    inputs: PlanInputs, stock: Stock, flask_mL: float, dilution: tuple[str, float] | None
) -> dict[str, Any]:
    """The inert salt of ``design.ionic_medium`` to weigh into one flask of the stock:
    m = c V M with M from :func:`planner.chem.species.molar_mass_g_per_mol`.

    The flask is made up in the medium before its salt (:func:`planner.chem.mixing.
    medium_label`); a dilution's aliquot brings its source's salt, a c_source, so the flask
    takes c_salt - a c_source of it."""
    medium = inputs.design.ionic_medium
    salt_M = stock.medium_salt_M
    if dilution is not None:
        source = next(st for st in inputs.stocks if st.id == dilution[0])
        salt_M -= dilution[1] * source.medium_salt_M
    if medium is None or salt_M <= 0:
        return {}
    mass = salt_M * flask_mL / 1000.0 * molar_mass_g_per_mol(medium.salt)
    return {"salt_formula": medium.salt, "salt_M": salt_M, "salt_mass_g": mass}


def combined_totals(totals: Sequence[Totals], inputs: PlanInputs) -> Totals:
    """Stock volumes of several sections' plans added up [mL] (each keeps its dead volume).

    Parameters
    ----------
    totals
        One Totals per section, all for the same stocks.
    inputs
        The plan, for making up the stocks once for all sections together.

    Returns
    -------
    Totals
        Sums per stock; ``per_bench`` and ``per_section`` are the largest of any section;
        what making the stocks takes is worked out again for the summed volumes.
    """
    first = totals[0]

    def add(key: str) -> dict[str, float]:
        return {s: sum(getattr(t, key).get(s, 0.0) for t in totals) for s in first.session}

    for_mixtures = {
        s: sum(t.to_prepare.get(s, 0.0) - t.for_stocks.get(s, 0.0) for t in totals)
        for s in first.session
    }

    def largest(key: str) -> dict[str, float]:
        return {s: max(getattr(t, key).get(s, 0.0) for t in totals) for s in first.session}

    return _with_stock_making(
        inputs,
        Totals(
            per_bench=largest("per_bench"),
            per_section=largest("per_section"),
            session=add("session"),
            to_prepare=for_mixtures,
            dead_volume_mL=first.dead_volume_mL,
        ),
    )
