"""Every mixture the shelf can make in the chosen vessel, evaluated in one vectorised pass.

A candidate gives each reagent stock (every stock but the diluent) a volume the glassware can
deliver, or none. In a tube the diluent makes up the rest, and that volume too must be
deliverable; in a volumetric flask the diluent fills to the mark. All candidates are then
mixed, solved (:func:`planner.chem.equilibrium.solve_equilibrium`) and read
(:mod:`planner.lab.photometer`) at once.

Graded devices (burets, graduated and piston pipettes) can deliver thousands of volumes; for
the design search their grid is thinned to round steps (at most ``_MAX_GRADED_VOLUMES`` per
stock), which also gives the bench volumes that are quick to set and read. Every thinned
volume is still one the device delivers.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import NDArray

from planner.chem.equilibrium import bound_fraction
from planner.chem.mixing import IonTable, ion_table, ionic_strength_after_reaction_M, mix_M
from planner.design._arrays import distinct, distinct_inverse
from planner.forward import Readings, predict_readings, total_reading_sensitivity
from planner.inputs import Bench, Device, PlanInputs, Stock
from planner.lab.bench import reading_sd, technique_sd_mL
from planner.lab.deliveries import Delivery, VolumeTable, devices_by_id, volume_table
from planner.lab.tolerances import standard_uncertainty_mL
from planner.records import record

__all__ = [
    "MIN_REAGENT_SHARE",
    "CandidateSet",
    "Evaluation",
    "Option",
    "candidate_set",
    "evaluate",
    "stock_order",
    "stock_shelves",
]

# Most graded volumes per stock kept for the search (design grid), and the round steps tried
# to thin a grid, in mL (common practice: staff set and read round volumes fastest).
_MAX_GRADED_VOLUMES = 120
# Least share of a flask the diluent fills to the mark (common practice).
_FLASK_DILUENT_SHARE = 0.1
_ROUND_STEPS_mL = (0.01, 0.02, 0.05, 0.1, 0.2, 0.25, 0.5, 1.0, 2.0, 5.0)
# Most candidates evaluated; more reagent stocks thin each stock's list further.
_MAX_CANDIDATES = 150_000
# Fewest volumes per stock the full product may leave before the search takes at most as
# many reagent stocks per mixture as there are components (about a third of what the
# default's three reagent stocks keep).
_FEW_VOLUMES = 20
_NL_PER_ML = 1_000_000
#: Least share of a reagent's total a stock must add to earn its place in a mixture (common
#: practice: a stock that adds under 5 % of the reagent only pads the excess with one more
#: delivery, bottle and error source for nothing a person would notice).
MIN_REAGENT_SHARE = 0.05


@record
class Option:
    """A way to deliver one volume of one stock.

    Attributes
    ----------
    volume_mL
        Volume [mL].
    devices
        Device ids, one per delivery.
    u_mL
        Combined standard uncertainty of the deliveries [mL] (independent deliveries in
        quadrature).
    deliveries
        The deliveries in order, each with its own volume (empty for "none" and for the
        diluent to the mark of a flask).
    """

    volume_mL: float
    devices: tuple[str, ...]
    u_mL: float
    deliveries: tuple[Delivery, ...] = ()


@record
class Evaluation:
    """Predicted state of a batch of mixtures.

    Attributes
    ----------
    initial_M
        Ion concentrations after mixing, shape (n, k) [mol/L].
    total_M
        Component totals, shape (n, n_components) [mol/L].
    free_M
        Free components at equilibrium, shape (n, n_components) [mol/L].
    species_M
        Product species at equilibrium, shape (n, n_species) [mol/L].
    true_absorbance
        Beer-Lambert absorbance of all absorbers, shape (n,) [unitless].
    absorbance
        Photometer reading with stray light, shape (n,) [unitless].
    bound_fraction
        Limiting reagent held in products, shape (n,) [unitless].
    coloured_fraction
        Limiting reagent held in the most absorbing product, per coefficient, shape (n,)
        [unitless].
    ionic_strength_M
        Ionic strength at equilibrium, shape (n,) [mol/L].
    """

    initial_M: NDArray[np.float64]
    total_M: NDArray[np.float64]
    free_M: NDArray[np.float64]
    species_M: NDArray[np.float64]
    true_absorbance: NDArray[np.float64]
    absorbance: NDArray[np.float64]
    bound_fraction: NDArray[np.float64]
    coloured_fraction: NDArray[np.float64]
    ionic_strength_M: NDArray[np.float64]

    def readings(self) -> Readings:
        """The forward model's readings these mixtures were evaluated with."""
        return Readings(
            free_M=self.free_M,
            species_M=self.species_M,
            true_absorbance=self.true_absorbance,
            absorbance=self.absorbance,
        )


@record
class CandidateSet:
    """All candidate mixtures and their evaluation.

    Attributes
    ----------
    stock_ids
        Stocks in column order of ``volumes_mL`` (reagent stocks first, the diluent last when
        there is one).
    options
        For each stock, the delivery options its column indexes (index 0 is "none").
    option_index
        Option of each stock in each candidate, shape (n, n_stocks) [unitless].
    volumes_mL
        Volume of each stock in each candidate, shape (n, n_stocks) [mL].
    total_volume_mL
        Final volume of every candidate [mL].
    deliveries
        Number of deliveries of each candidate, shape (n,) [unitless].
    u_relative_total
        Relative standard uncertainty of each component's total concentration from stock
        concentrations, deliveries and final volume, shape (n, n_components) [unitless].
    u_absorbance
        Screening estimate of each reading's standard uncertainty: the component totals'
        uncertainties through the forward model's sensitivity, plus the reading noise, shape
        (n,) [unitless]. The plan's own u(A) comes from the prediction stage, which also
        carries the correlations this estimate leaves out.
    ions
        The ion table of the stocks, in the same stock order.
    evaluation
        Predicted state.
    padded
        Candidates in which some reagent stock adds less than :data:`MIN_REAGENT_SHARE` of
        every reaction component it brings beyond the diluent, shape (n,): recipes a person
        would not write, kept out of standards and tests.
    """

    stock_ids: tuple[str, ...]
    options: tuple[tuple[Option, ...], ...]
    option_index: NDArray[np.int64]
    volumes_mL: NDArray[np.float64]
    total_volume_mL: float
    deliveries: NDArray[np.int64]
    u_relative_total: NDArray[np.float64]
    u_absorbance: NDArray[np.float64]
    ions: IonTable
    evaluation: Evaluation
    padded: NDArray[np.bool_]

    @property
    def size(self) -> int:
        """Number of candidates."""
        return int(self.volumes_mL.shape[0])


def stock_order(inputs: PlanInputs) -> tuple[Stock, ...]:
    """Stocks in order of addition: diluent, excess reagents, the limiting reagent last.

    Common practice: the limiting (coloured-product-forming) reagent goes in last, into the
    medium and the excess, so no local excess of it forms the higher complexes.
    """
    limiting = inputs.design.limiting
    diluent = [st for st in inputs.stocks if st.diluent]
    others = [st for st in inputs.stocks if not st.diluent]
    excess = [st for st in others if limiting not in st.contains_M]
    last = [st for st in others if limiting in st.contains_M]
    return tuple(diluent + excess + last)


def _thin(volumes_mL: NDArray[np.float64]) -> NDArray[np.float64]:
    """Keep discrete volumes; thin long graded runs to a round step.

    Thinning looks at the distinct volumes alone, so deliveries are worked out only for the
    volumes kept (a shelf of fifteen graded devices lists some 15 000 volumes, of which at
    most :data:`_MAX_GRADED_VOLUMES` survive).
    """
    kept = volumes_mL
    if kept.size > _MAX_GRADED_VOLUMES:
        keys = np.rint(kept * _NL_PER_ML).astype(np.int64)
        for step in _ROUND_STEPS_mL:
            rounded: NDArray[np.float64] = kept[keys % round(step * _NL_PER_ML) == 0]
            if rounded.size <= _MAX_GRADED_VOLUMES:
                return rounded
        kept = kept[:: max(1, kept.size // _MAX_GRADED_VOLUMES)]
    return kept


def _option(table: VolumeTable, volume_mL: float, bench: Bench, shelf: dict[str, Device]) -> Option:
    aliquots = table.best(volume_mL)
    assert aliquots is not None  # only tabulated volumes are asked for
    # The bench's technique adds an independent error to every delivery (in quadrature).
    technique = sum(
        technique_sd_mL(bench, shelf[d.device], d.volume_mL) ** 2 for d in aliquots.deliveries
    )
    return Option(
        volume_mL=aliquots.volume_mL,
        devices=aliquots.devices,
        u_mL=math.sqrt(aliquots.u_mL**2 + technique),
        deliveries=aliquots.deliveries,
    )


def stock_shelves(
    inputs: PlanInputs, left_out: frozenset[str] = frozenset()
) -> dict[str, tuple[Device, ...]]:
    """The glassware each stock may use: burets go to one stock each.

    A buret is filled with one stock for the whole session (common practice: rinsing and
    refilling a buret between mixtures wastes stock and time and risks carry-over), so a
    buret entry serves at most ``count`` stocks. Burets go to stocks in order of addition
    (:func:`stock_order`: the diluent, then the excess reagents, the limiting reagent last),
    passing over the stocks in ``left_out`` (the design found no use for them at the bench);
    a stock beyond the count delivers with the other glassware. In a flask the diluent fills
    to the mark and takes no buret. Every other device is shared (a pipette is rinsed with
    the next stock).
    """
    in_flask = inputs.design.vessel_kind == "volumetric-flask"
    shelves: dict[str, tuple[Device, ...]] = {}
    others = tuple(device for device in inputs.glassware if device.kind != "buret")
    for stock in stock_order(inputs):
        if stock.id in left_out and not (in_flask and stock.diluent):
            shelves[stock.id] = others
    measured = [
        st for st in stock_order(inputs) if not (in_flask and st.diluent) and st.id not in left_out
    ]
    for position, stock in enumerate(measured):
        shelves[stock.id] = tuple(
            device
            for device in inputs.glassware
            if device.kind != "buret" or position < device.count
        )
    return shelves


def candidate_set(inputs: PlanInputs, left_out: frozenset[str] = frozenset()) -> CandidateSet:
    """Enumerate and evaluate every candidate mixture the shelf can make.

    Parameters
    ----------
    inputs
        The validated plan.
    left_out
        Reagent stocks the candidates leave out (volume 0 in every mixture, no buret): the
        design's second try when its first used none of them.

    Returns
    -------
    CandidateSet
        Empty (or, in a flask, only the diluent to the mark) when the shelf delivers no
        volume up to the total volume; the design then fails its feasibility checks.
    """
    design = inputs.design
    total_mL = design.total_volume_mL
    ordered = stock_order(inputs)
    reagents = [st for st in ordered if not st.diluent]
    diluent = inputs.diluent
    in_flask = design.vessel_kind == "volumetric-flask"

    # A shelf that delivers nothing up to the total volume (only a 25 mL pipette for 10 mL
    # tubes) is a valid plan that cannot be made: the candidate set is then empty, or just
    # the diluent in a flask, and the design reports failed checks (design-feasibility,
    # mixture-count) instead of an error, so the person sees what binds. One table of
    # distinct volumes per distinct shelf (stocks share it unless burets are scarce).
    shelves = stock_shelves(inputs, left_out)
    tables: dict[tuple[Device, ...], VolumeTable] = {}
    for shelf in shelves.values():
        if shelf not in tables:
            tables[shelf] = volume_table(shelf, max_volume_mL=total_mL)
    thinned = {
        st.id: np.zeros(0) if st.id in left_out else _thin(tables[shelves[st.id]].volumes_mL())
        for st in reagents
    }

    # Fewer volumes per stock when the product of the lists would be too long.
    full = [int(thinned[st.id].size) + 1 for st in reagents]
    limit = _shrink(full, math.prod)
    # Many reagent stocks: every combination of all of them leaves only a few volumes each.
    # Then a mixture takes at most as many reagent stocks as the reaction has components:
    # any component totals a nonnegative mix of the stocks reaches, a mix of at most that
    # many of them reaches too (Caratheodory's theorem for cones, from memory), so the
    # search keeps its reach and many more volumes per stock.
    most_stocks = len(inputs.reaction.components)
    subsets = most_stocks < len(reagents) and any(
        n < min(f, _FEW_VOLUMES) for n, f in zip(limit, full, strict=True)
    )
    if subsets:
        limit = _shrink(full, lambda sizes: _subset_count(sizes, most_stocks))
    none = Option(volume_mL=0.0, devices=(), u_mL=0.0)
    by_id = devices_by_id(inputs.glassware)
    # Stocks that share a shelf ask for many of the same volumes: each is looked up once.
    known: dict[tuple[int, float], Option] = {}

    def option(table: VolumeTable, volume_mL: float) -> Option:
        key = (id(table), volume_mL)
        if key not in known:
            known[key] = _option(table, volume_mL, inputs.bench, by_id)
        return known[key]

    columns: list[tuple[Option, ...]] = []
    for st, per_stock in zip(reagents, limit, strict=True):
        volumes = thinned[st.id]
        if per_stock < volumes.size + 1:
            pick = distinct(np.linspace(0, volumes.size - 1, per_stock - 1).round().astype(int))
            volumes = volumes[pick]
        table = tables[shelves[st.id]]
        columns.append((none, *(option(table, float(v)) for v in volumes)))

    # No mixture holds more reagent than this (the rest is diluent, at least a tenth of a
    # flask: common practice, leaving room to adjust to the mark).
    most_mL = (1.0 - _FLASK_DILUENT_SHARE) * total_mL if in_flask else total_mL
    column_volumes = [np.array([o.volume_mL for o in c]) for c in columns]
    if subsets:
        grid = _subset_grid([len(c) for c in columns], most_stocks).reshape(-1, len(reagents))
        volumes = np.stack([v[grid[:, j]] for j, v in enumerate(column_volumes)], axis=1)
        used = volumes.sum(axis=1)
        keep = used <= most_mL + 1e-9
        grid, volumes, used = grid[keep], volumes[keep], used[keep]
    else:
        grid, volumes, used = _product_grid(column_volumes, most_mL)
    if not in_flask and diluent is None:
        keep = np.abs(used - total_mL) <= 1e-9
        grid, volumes, used = grid[keep], volumes[keep], used[keep]

    stock_ids = [st.id for st in reagents]
    index_columns = [grid[:, j] for j in range(len(reagents))]
    volume_columns = [volumes[:, j] for j in range(len(reagents))]
    if diluent is not None:
        # To the nanolitre, the grid every volume is on: 10 - 7.6 is 2.4, not 2.4000000000000004.
        rest = np.rint((total_mL - used) * _NL_PER_ML) / _NL_PER_ML
        if in_flask:
            flask = inputs.flask
            assert flask is not None
            to_mark: list[Option] = [Option(volume_mL=0.0, devices=(flask.id,), u_mL=0.0)]
            index_columns.append(np.zeros(len(rest), dtype=np.int64))
            volume_columns.append(rest)
            columns.append(tuple(to_mark))
        else:
            table = tables[shelves[diluent.id]]
            keys = np.rint(rest * _NL_PER_ML).astype(np.int64)
            unique_keys, inverse = distinct_inverse(keys)
            deliverable = table.contains(unique_keys / _NL_PER_ML) & (unique_keys > 0)
            diluent_list = [none]
            lookup = np.zeros(unique_keys.size, dtype=np.int64)
            for position in np.flatnonzero(deliverable).tolist():
                lookup[position] = len(diluent_list)
                diluent_list.append(option(table, float(unique_keys[position]) / _NL_PER_ML))
            zero = unique_keys == 0
            ok = (deliverable | zero)[inverse.reshape(-1)]
            index = lookup[inverse.reshape(-1)]
            index_columns = [c[ok] for c in index_columns]
            volume_columns = [c[ok] for c in volume_columns]
            index_columns.append(index[ok])
            volume_columns.append(np.array([o.volume_mL for o in diluent_list])[index[ok]])
            columns.append(tuple(diluent_list))
        stock_ids.append(diluent.id)

    option_index = np.stack(index_columns, axis=1).astype(np.int64)
    volumes_mL = np.stack(volume_columns, axis=1)
    n_options = [len(c) for c in columns]
    deliveries = np.zeros(len(volumes_mL), dtype=np.int64)
    u_squared = np.zeros(len(volumes_mL))
    for j, col in enumerate(columns):
        count = np.array([len(o.devices) for o in col])
        u = np.array([o.u_mL for o in col])
        deliveries += count[option_index[:, j]] if n_options[j] else 0
        u_squared += u[option_index[:, j]] ** 2
    if in_flask:
        flask = inputs.flask
        assert flask is not None
        total_u_mL = np.full(len(volumes_mL), standard_uncertainty_mL(flask))
        deliveries -= 1  # filling to the mark is not a measured delivery
    else:
        total_u_mL = np.sqrt(u_squared)

    stocks_in_order = tuple(inputs.stock(sid) for sid in stock_ids)
    ions = ion_table(stocks_in_order)
    evaluation = evaluate(inputs, ions, volumes_mL, total_mL)

    u_relative_total = _relative_total_uncertainty(
        inputs, stocks_in_order, columns, option_index, volumes_mL, total_u_mL / total_mL
    )

    u_absorbance = _reading_uncertainty(inputs, evaluation, u_relative_total)

    return CandidateSet(
        stock_ids=tuple(stock_ids),
        options=tuple(columns),
        option_index=option_index,
        volumes_mL=volumes_mL,
        total_volume_mL=total_mL,
        deliveries=deliveries,
        u_relative_total=u_relative_total,
        u_absorbance=u_absorbance,
        ions=ions,
        evaluation=evaluation,
        padded=_padded(inputs, stocks_in_order, volumes_mL),
    )


def _shrink(sizes: Sequence[int], count: Callable[[Sequence[int]], int]) -> list[int]:
    """Options per stock ("none" included), the longest lists cut by a tenth at a time until
    ``count`` of them is at most ``_MAX_CANDIDATES`` (or every list is down to 3)."""
    limit = list(sizes)
    while count(limit) > _MAX_CANDIDATES and max(limit) > 3:
        largest = max(limit)
        limit = [n - max(1, n // 10) if n == largest else n for n in limit]
    return limit


def _subset_count(sizes: Sequence[int], most_stocks: int) -> int:
    """Candidates that use at most ``most_stocks`` of the stocks, each stock at one of its
    ``size - 1`` volumes: the elementary symmetric sums of the list lengths up to that order."""
    sums = [1] + [0] * most_stocks
    for size in sizes:
        for order in range(most_stocks, 0, -1):
            sums[order] += sums[order - 1] * (size - 1)
    return sum(sums)


def _product_grid(
    column_volumes: Sequence[NDArray[np.float64]], most_mL: float
) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
    """Every combination of one option per stock whose volumes add up to at most ``most_mL``.

    Returns (option indices, shape (n, n_stocks); their volumes [mL], same shape; each row's
    sum [mL], shape (n,)), rows in itertools.product's order (the last stock varying
    fastest). Volumes are not negative, so a partial sum over the limit stays over it: the
    combinations grow one stock at a time and drop such rows at once, and the work follows
    the mixtures that fit rather than every combination (132 651 for 9 796 kept on the
    default plan). Each sum is added in stock order, as a row sum adds.
    """
    grid = np.zeros((1, 0), dtype=np.int64)
    used = np.zeros(1)
    for volumes in column_volumes:
        rows = np.repeat(np.arange(used.size), volumes.size)
        options = np.tile(np.arange(volumes.size, dtype=np.int64), used.size)
        total = used[rows] + volumes[options]
        keep = total <= most_mL + 1e-9
        grid = np.concatenate([grid[rows[keep]], options[keep, None]], axis=1)
        used = total[keep]
    volumes_mL = np.zeros(grid.shape)
    for j, volumes in enumerate(column_volumes):
        volumes_mL[:, j] = volumes[grid[:, j]]
    return grid, volumes_mL, used


def _subset_grid(sizes: Sequence[int], most_stocks: int) -> NDArray[np.int64]:
    """Option indices of every candidate that uses at most ``most_stocks`` of the stocks,
    shape (n, len(sizes)); index 0 is "none". Fewer stocks first, then stocks in order."""
    blocks = [np.zeros((1, len(sizes)), dtype=np.int64)]
    for used in range(1, most_stocks + 1):
        for subset in itertools.combinations(range(len(sizes)), used):
            ranges = [np.arange(1, sizes[j], dtype=np.int64) for j in subset]
            if any(r.size == 0 for r in ranges):
                continue
            mesh = np.meshgrid(*ranges, indexing="ij")
            block = np.zeros((mesh[0].size, len(sizes)), dtype=np.int64)
            for j, axis in zip(subset, mesh, strict=True):
                block[:, j] = axis.reshape(-1)
            blocks.append(block)
    return np.concatenate(blocks)


def _padded(
    inputs: PlanInputs, stocks: Sequence[Stock], volumes_mL: NDArray[np.float64]
) -> NDArray[np.bool_]:
    """Candidates in which a reagent stock only pads what other stocks already bring.

    A reagent stock's own components are the reaction components it holds at a higher
    concentration than the diluent (the medium's H+ in every stock is not what the stock is
    for). The stock pads a mixture when, for each of its own components, it adds less than
    :data:`MIN_REAGENT_SHARE` of the mixture's total (a dilute iron stock beside the strong
    one in an excess). A stock with no component of its own (a salt for the medium) never
    pads.
    """
    components = inputs.reaction.components
    diluent = inputs.diluent
    n = volumes_mL.shape[0]
    amounts = np.array(
        [[st.contains_M.get(c, 0.0) for c in components] for st in stocks], dtype=np.float64
    ).reshape(len(stocks), len(components))
    total = volumes_mL @ amounts  # (n, components), mmol
    padded = np.zeros(n, dtype=bool)
    for s, stock in enumerate(stocks):
        if stock.diluent:
            continue
        own = [
            j
            for j, c in enumerate(components)
            if amounts[s, j] > (diluent.contains_M.get(c, 0.0) if diluent is not None else 0.0)
        ]
        if not own:
            continue
        used = volumes_mL[:, s] > 0
        added = volumes_mL[:, s, None] * amounts[s, own][None, :]
        safe = np.where(total[:, own] > 0, total[:, own], 1.0)
        minor = np.all(added < MIN_REAGENT_SHARE * safe, axis=1)
        padded |= used & minor
    return padded


def _reading_uncertainty(
    inputs: PlanInputs, evaluation: Evaluation, u_relative_total: NDArray[np.float64]
) -> NDArray[np.float64]:
    """u(A) of each candidate: sqrt(u_read^2 + sum_j (dA/dT_j u(T_j))^2) (GUM, JCGM 100:2008,
    eq. 10, components taken as independent), dA/dT_j the forward model's exact derivative
    (:func:`planner.forward.total_reading_sensitivity`); u_read is the heteroscedastic reading
    noise of :func:`planner.lab.bench.reading_sd` at the candidate's reading."""
    totals = evaluation.total_M
    variance = reading_sd(inputs.instrument, inputs.bench, evaluation.absorbance) ** 2
    readings = evaluation.readings()
    for j in range(totals.shape[1]):
        slope = total_reading_sensitivity(inputs.reaction, inputs.instrument, readings, totals, j)
        variance += (slope * u_relative_total[:, j] * totals[:, j]) ** 2
    result: NDArray[np.float64] = np.sqrt(variance)
    return result


def _relative_total_uncertainty(
    inputs: PlanInputs,
    stocks: Sequence[Stock],
    columns: Sequence[Sequence[Option]],
    option_index: NDArray[np.int64],
    volumes_mL: NDArray[np.float64],
    u_relative_volume: NDArray[np.float64],
) -> NDArray[np.float64]:
    """First-order relative uncertainty of each component total (GUM, JCGM 100:2008, 5.1.2).

    c_j = sum_s c_sj V_s / V: each stock contributes its share w_s of the total with
    relative uncertainty sqrt(u(c_s)^2/c_s^2 + u(V_s)^2/V_s^2); the final volume adds
    u(V)/V to every component.
    """
    components = inputs.reaction.components
    n = volumes_mL.shape[0]
    result = np.zeros((n, len(components)))
    for j, component in enumerate(components):
        amounts = np.zeros((n, len(stocks)))
        rel_squared = np.zeros((n, len(stocks)))
        for s, stock in enumerate(stocks):
            conc = stock.contains_M.get(component, 0.0)
            if conc <= 0:
                continue
            v = volumes_mL[:, s]
            u = np.array([o.u_mL for o in columns[s]])[option_index[:, s]]
            safe = np.where(v > 0, v, 1.0)
            amounts[:, s] = conc * v
            rel_squared[:, s] = (u / safe) ** 2 + stock.relative_uncertainty**2
        total = amounts.sum(axis=1)
        safe_total = np.where(total > 0, total, 1.0)
        share = amounts / safe_total[:, None]
        result[:, j] = np.sqrt((share**2 * rel_squared).sum(axis=1) + u_relative_volume**2)
    return result


def evaluate(
    inputs: PlanInputs,
    ions: IonTable,
    volumes_mL: NDArray[np.float64],
    total_volume_mL: float | NDArray[np.float64],
) -> Evaluation:
    """Mix, solve and read a batch of mixtures.

    Parameters
    ----------
    inputs
        The plan (reaction, instrument, design.limiting).
    ions
        Ion table of the stocks whose volumes are given, in column order.
    volumes_mL
        Stock volumes, shape (n, n_stocks) [mL].
    total_volume_mL
        Final volume, scalar or (n,) [mL].

    Returns
    -------
    Evaluation
    """
    reaction = inputs.reaction
    initial = mix_M(ions, volumes_mL, total_volume_mL)
    columns = ions.component_columns(reaction.components)
    totals = np.zeros((initial.shape[0], len(reaction.components)))
    for j, col in enumerate(columns):
        if col is not None:
            totals[:, j] = initial[:, col]
    matrix = reaction.stoichiometry()
    solved = predict_readings(reaction, inputs.instrument, totals)
    true_a, observed = solved.true_absorbance, solved.absorbance
    limiting = reaction.components.index(inputs.design.limiting)
    fraction = bound_fraction(solved.species_M, matrix, limiting, totals)
    coloured = inputs.measured
    safe = np.where(totals[:, limiting] > 0, totals[:, limiting], 1.0)
    coloured_fraction = np.where(
        totals[:, limiting] > 0,
        solved.species_M[:, coloured] * matrix[coloured, limiting] / safe,
        0.0,
    )
    strength = ionic_strength_after_reaction_M(
        ions, initial, reaction, solved.free_M, solved.species_M
    )
    return Evaluation(
        initial_M=initial,
        total_M=totals,
        free_M=solved.free_M,
        species_M=solved.species_M,
        true_absorbance=true_a,
        absorbance=observed,
        bound_fraction=fraction,
        coloured_fraction=coloured_fraction,
        ionic_strength_M=strength,
    )
