"""Independent re-check of a finished plan from first principles.

Nothing here calls the optimiser or the prediction (this module, and
:mod:`planner.verify_prediction` which it uses, import neither :mod:`planner.design` nor
:mod:`planner.predict`): every recipe is re-mixed from its additions, re-solved and re-read,
every volume is checked against the devices it names and the shelf, every total, every
reading's uncertainty, every stock's preparation and the prediction are recomputed, and every
stated number is compared with its recomputation. The findings are the plan's ``checks``:
data, never exceptions.

:func:`verify_plan` checks the recipes, their stated state and the totals (the design runs it
on every plan it makes); :func:`verify_result` adds the two blocks the design makes after
verification, ``preparation`` and ``prediction``, for a saved result (``planner verify``).
"""

from __future__ import annotations

import dataclasses
import math
from collections import Counter, defaultdict
from collections.abc import Callable, Mapping, Sequence
from typing import Any, Protocol, TypeVar

import numpy as np

from planner.analysis import far_off
from planner.chem.activity import INERT_SALTS
from planner.chem.assumption import (
    LARGEST_DISSOLVED_M,
    PRACTICAL_FREE_EXCESS_M,
    checked_round_up,
)
from planner.chem.constants import medium_matters
from planner.chem.equilibrium import bound_fraction, solve_equilibrium
from planner.chem.mixing import ion_table, ionic_strength_after_reaction_M, medium_label, mix_M
from planner.chem.species import charge_from_name, molar_mass_g_per_mol, neutralised
from planner.errors import InvalidInputError
from planner.inputs import Device, PlanInputs, Stock
from planner.lab.deliveries import MAX_DELIVERIES, delivers, devices_by_id, is_deliverable
from planner.lab.glassware import stock_flasks
from planner.lab.photometer import observed_absorbance, true_absorbance
from planner.lab.tolerances import standard_uncertainty_mL
from planner.result import (
    ROLES,
    Addition,
    Check,
    GlobalFitPrediction,
    Mixture,
    Prediction,
    StockPreparation,
    Totals,
    devices_text,
    stock_volume_text,
)
from planner.verify_global_fit import recompute_global_fit
from planner.verify_prediction import (
    RecomputedPrediction,
    bench_log_beta,
    delivery_split_mL,
    delivery_volumes_mL,
    measured_deliveries,
    reading_noise_sd,
    recompute_prediction,
    technique_u_mL,
)

__all__ = [
    "CHECK_NAMES",
    "GLOBAL_FIT_NOTE",
    "RESULT_CHECK_NAMES",
    "inventory_check",
    "reading_temperature_slope",
    "verify_plan",
    "verify_result",
    "verify_saved",
]

#: Stable names of the checks of :func:`verify_plan`, in the order they are run.
CHECK_NAMES = (
    "mixture-count",
    "deliverable-volumes",
    "volume-totals",
    "concentrations",
    "absorbance-window",
    "standards-span",
    "blank-reading",
    "reading-uncertainty",
    "limiting-reagent-assumption",
    "product-speciation",
    "bound-fraction-coverage",
    "ionic-strength",
    "stock-totals",
    "stock-inventory",
    "stock-composition",
    "cuvette-fill",
    "device-count",
    "buret-per-stock",
)
#: Stable names of the checks of :func:`verify_result` (a saved plan result), in order: those
#: of :func:`verify_plan`, then the prep room's ``preparation`` and the answer key's
#: ``prediction``.
RESULT_CHECK_NAMES = (*CHECK_NAMES, "preparation", "prediction")

# Relative agreement required between stated and recomputed numbers: JSON keeps full float
# precision, so anything beyond rounding (1e-12) is an edit or a bug; 1e-7 leaves room for
# the solver's own 1e-10 mass-balance tolerance.
_RTOL = 1e-7
_ATOL_ABSORBANCE = 1e-7
_ATOL_VOLUME_mL = 1e-6
# The equilibrium solver stops when every mass-balance residual is below 1e-12 of its total
# (planner.chem.equilibrium), so no concentration it gives is off by more than about that
# much of the largest total; ten times that is the absolute floor of the comparison.
_ATOL_EQUILIBRIUM = 1e-11
# The prediction is a longer chain of arithmetic (a least-squares slope, the 1:1 expression,
# a sum of squares over every input), done here in another order than in the design.
_RTOL_PREDICTION = 1e-6
# A stated prediction may also differ from the recomputation by this many times how far the
# recomputation moves under a change of its inputs in their last digits
# (planner.verify_prediction.ROUNDING_PROBE): an ill-conditioned K is decided by rounding.
_NOISE = 100.0
# The global fit's prediction is re-derived by finite differences (steps 1e-4 in the
# constants, 1e-6 in the totals) where the prediction stage differentiates exactly in the
# constants, so it agrees to their truncation error, far below 1e-4 relative.
_RTOL_GLOBAL_FIT = 1e-4
# Every standard and test reading +/- this many u(A) inside the window (2 u: about 95 %).
_MARGIN_U = 2.0
# The standards' blank-subtracted readings span at least this share of the window (common
# practice).
_STANDARDS_SPAN = 0.5
# A reagent blank reading above this share of the window's width is worth a warning (common
# practice).
_HIGH_BLANK = 0.1
# Problems listed in one check's detail before "and N more".
_MAX_LISTED = 8


def _fmt(value: float) -> str:
    return f"{value:.4g}"


def _pair(stated: float | None, computed: float) -> str:
    """'stated X, recomputed Y' with enough digits that X and Y differ when they do."""
    if stated is None:
        return f"stated nothing, recomputed {_fmt(computed)}"
    for digits in (4, 7, 10, 17):
        if f"{stated:.{digits}g}" != f"{computed:.{digits}g}" or digits == 17:
            return f"stated {stated:.{digits}g}, recomputed {computed:.{digits}g}"
    return ""  # unreachable


def _names(items: Sequence[str], limit: int = 6) -> str:
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def verify_plan(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    totals: Totals,
    *,
    analysis: str = "all-bound",
) -> tuple[Check, ...]:
    """Re-check every recipe, reading and total of a plan.

    Parameters
    ----------
    inputs
        The validated plan inputs.
    mixtures
        The plan's mixtures with their stated state.
    totals
        The plan's stated stock totals [mL].
    analysis
        The analysis the plan is designed for (``"all-bound"`` or ``"global-fit"``): the
        global fit does not assume the standards' limiting reagent all bound, so standards
        short of the tolerance are then a warning, not a failure.

    Returns
    -------
    tuple of Check
        One per name in :data:`CHECK_NAMES`, in that order.

    Notes
    -----
    The work is linear in the number of mixtures: one vectorised mass-action solution for
    all of them, and a constant amount of work per addition.
    """
    return tuple(_plan_checks(inputs, mixtures, totals, _State(inputs, mixtures), analysis))


def verify_result(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    totals: Totals,
    preparations: Sequence[StockPreparation] | None,
    prediction: Prediction | None,
    *,
    analysis: str = "all-bound",
    global_fit: GlobalFitPrediction | None = None,
) -> tuple[Check, ...]:
    """Re-check a saved plan result: everything :func:`verify_plan` checks, the preparation
    of every stock and the predictions of both analyses.

    Parameters
    ----------
    inputs, mixtures, totals
        As for :func:`verify_plan`.
    preparations
        The stated ``preparation`` block, or None when the result has none.
    prediction
        The stated ``prediction`` block, or None when the result has none (or states null).
    analysis
        The analysis the plan was designed for (``"all-bound"`` or ``"global-fit"``).
    global_fit
        The stated global-fit prediction, or None.

    Returns
    -------
    tuple of Check
        One per name in :data:`RESULT_CHECK_NAMES`, in that order. ``preparation`` fails
        when a flask, a flask count, a formula, a molar mass, a purity, a mass, the ion a solid
        provides, its concentration or the medium differs from a recomputation from the
        inputs and the recomputed stock totals, or when a stock is missing, repeated or
        unknown; it warns when the result has no preparation block. ``prediction`` fails
        when any number of the block differs from :func:`planner.verify_prediction.
        recompute_prediction`, or when the block states numbers the recipes cannot give; it
        warns when the result states no prediction though the recipes give one.
    """
    state = _State(inputs, mixtures)
    checks = _plan_checks(inputs, mixtures, totals, state, analysis)
    checks.append(_preparation(inputs, mixtures, preparations))
    checks.append(_prediction(inputs, mixtures, state, prediction, analysis, global_fit))
    return tuple(checks)


class SavedResult(Protocol):
    """What a saved plan result holds (:class:`planner.resultfile.SavedPlan` is one)."""

    @property
    def inputs(self) -> PlanInputs: ...
    @property
    def mixtures(self) -> Sequence[Mixture]: ...
    @property
    def totals(self) -> Totals: ...
    @property
    def preparations(self) -> Sequence[StockPreparation] | None: ...
    @property
    def prediction(self) -> Prediction | None: ...
    @property
    def analysis(self) -> str: ...
    @property
    def global_fit(self) -> GlobalFitPrediction | None: ...


def verify_saved(saved: SavedResult) -> tuple[Check, ...]:
    """:func:`verify_result` of a saved result, every block as it states it."""
    return verify_result(
        saved.inputs,
        saved.mixtures,
        saved.totals,
        saved.preparations,
        saved.prediction,
        analysis=saved.analysis,
        global_fit=saved.global_fit,
    )


def _plan_checks(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    totals: Totals,
    state: _State,
    analysis: str = "all-bound",
) -> list[Check]:
    return [
        _mixture_count(inputs, mixtures),
        _deliverable(inputs, mixtures),
        _volume_totals(inputs, mixtures),
        _concentrations(inputs, mixtures, state),
        _window(inputs, mixtures, state),
        _standards_span(inputs, mixtures, state),
        _blank_check(inputs, mixtures, state),
        _reading_uncertainty(inputs, mixtures, state),
        _assumption(inputs, mixtures, state, analysis),
        _speciation(inputs, mixtures, state),
        _coverage(inputs, mixtures, state),
        _ionic_strength(inputs, mixtures, state),
        _stock_totals(inputs, mixtures, totals),
        _inventory(inputs, totals),
        _stock_composition(inputs),
        _cuvette(inputs, mixtures),
        _device_count(inputs, mixtures),
        _burets(inputs, mixtures),
    ]


class _State:
    """Recomputed state of every mixture (arrays in mixture order)."""

    def __init__(
        self,
        inputs: PlanInputs,
        mixtures: Sequence[Mixture],
    ) -> None:
        stocks = inputs.stocks
        self.ions = ion_table(stocks)
        # A negative volume is reported by the deliverable-volumes check; here it counts as
        # nothing delivered, so the re-mix stays physical.
        volumes = np.maximum(
            np.array([[m.volume_of(st.id) for st in stocks] for m in mixtures], dtype=float),
            0.0,
        ).reshape(len(mixtures), len(stocks))
        # The volume actually made is what the additions add up to (the volume-totals check
        # reports any disagreement with the stated total); fall back to the design's volume.
        added = volumes.sum(axis=1)
        self.initial = mix_M(
            self.ions, volumes, np.where(added > 0, added, inputs.design.total_volume_mL)
        )
        reaction = inputs.reaction
        self.components = np.zeros((len(mixtures), len(reaction.components)))
        for j, col in enumerate(self.ions.component_columns(reaction.components)):
            if col is not None:
                self.components[:, j] = self.initial[:, col]
        matrix = reaction.stoichiometry()
        self.free, self.species, self.net_absorbance, self.absorbance = _solve_and_read(
            inputs, self.components
        )
        limiting = reaction.components.index(inputs.design.limiting)
        self.bound = bound_fraction(self.species, matrix, limiting, self.components)
        self.limiting_total = self.components[:, limiting]
        self.ionic_strength = ionic_strength_after_reaction_M(
            self.ions, self.initial, reaction, self.free, self.species
        )


def _check(name: str, problems: list[str], ok_detail: str, *, warn: bool = False) -> Check:
    if not problems:
        return Check(name, "pass", ok_detail)
    return Check(name, "warn" if warn else "fail", "; ".join(problems))


def _listed(problems: list[str]) -> list[str]:
    """The first problems, and how many more there are."""
    if len(problems) <= _MAX_LISTED:
        return problems
    return [*problems[:_MAX_LISTED], f"and {len(problems) - _MAX_LISTED} more"]


def _mixture_count(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    design = inputs.design
    counts = {role: sum(1 for m in mixtures if m.role == role) for role in ROLES}
    problems = []
    if counts["standard"] != design.standards:
        problems.append(
            f"{counts['standard']} standards where the plan asks for {design.standards}: the "
            "shelf cannot make that many distinct standards in the window; add a device with "
            "a finer volume step (a buret or graduated pipette), or ask for fewer standards"
        )
    if counts["test"] != design.tests:
        problems.append(
            f"{counts['test']} test mixtures where the plan asks for {design.tests}: too few "
            "deliverable mixtures lie in the window with a bound fraction inside "
            f"{design.bound_fraction_range[0]:g}-{design.bound_fraction_range[1]:g}; widen "
            "design.bound_fraction_range, add finer glassware or a more dilute excess stock"
        )
    if counts["blank"] < 1:
        problems.append("no reagent blank: add one mixture with every reagent but the limiting one")
    elif counts["blank"] != design.blanks:
        problems.append(
            f"{counts['blank']} blanks where the plan asks for {design.blanks} "
            "(design.blanks): give every blank the same recipe, as many as asked"
        )
    # Counted once each (a Counter), so the check stays linear in the number of mixtures.
    duplicates = sorted(i for i, n in Counter(m.id for m in mixtures).items() if n > 1)
    if duplicates:
        problems.append(f"mixture ids used twice: {_names(duplicates)}")
    bad_roles = [m.id for m in mixtures if m.role not in ROLES]
    if bad_roles:
        problems.append(f"unknown role for {_names(bad_roles)}: use {', '.join(ROLES)}")
    for role in ("standard", "test"):
        recipes = [
            tuple(sorted((a.stock, round(a.volume_mL, 6)) for a in m.additions))
            for m in mixtures
            if m.role == role
        ]
        if len(set(recipes)) < len(recipes):
            problems.append(f"two {role}s have the same recipe: every {role} must differ")
    return _check(
        "mixture-count",
        problems,
        ", ".join(
            f"{counts[role]} {role}{'' if counts[role] == 1 else 's'}"
            for role in ("blank", "standard", "test")
        ),
    )


def _deliverable(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    devices = devices_by_id(inputs.glassware)
    shelf = set(devices)
    flask_id = (
        f"volumetric-flask-{inputs.design.flask_volume_mL:g}mL"
        if inputs.design.flask_volume_mL is not None
        else None
    )
    diluent = inputs.diluent
    stock_ids = {st.id for st in inputs.stocks}
    problems = []
    for m in mixtures:
        for a in m.additions:
            where = f"{m.id} {a.stock} {a.volume_mL:g} mL"
            if a.stock not in stock_ids:
                problems.append(f"{where}: no stock named {a.stock!r} in the plan")
                continue
            if a.volume_mL <= 0:
                problems.append(f"{where}: a volume must be positive")
                continue
            if (
                flask_id is not None
                and diluent is not None
                and a.stock == diluent.id
                and tuple(a.devices) == (flask_id,)
            ):
                continue  # diluent to the mark of the vessel flask
            missing = [d for d in a.devices if d not in shelf]
            if missing:
                problems.append(
                    f"{where}: {_names(missing)} not on the shelf (the glassware list has "
                    f"{_names(sorted(shelf))})"
                )
            elif a.deliveries:
                problem = _stated_deliveries_problem(devices, a)
                if problem is not None:
                    problems.append(f"{where}: {problem}")
            elif (
                problem := _delivery_problem(inputs, devices, a.volume_mL, a.devices)
            ) is not None:
                problems.append(f"{where}: {problem}")
    return _check(
        "deliverable-volumes",
        problems,
        "every volume is deliverable with the devices named, all on the shelf",
    )


def _stated_deliveries_problem(devices: Mapping[str, Device], addition: Addition) -> str | None:
    """What is wrong with an addition's stated deliveries, or None when they are sound.

    Each delivery must be one reading of its device (on its scale, at or above its
    ``min_delivery_mL``, a piston pipette inside its range), the deliveries must name the
    addition's devices in order and sum to its volume, and there may be at most
    :data:`planner.lab.deliveries.MAX_DELIVERIES` of them (common practice).
    """
    stated = addition.deliveries
    if tuple(d.device for d in stated) != tuple(addition.devices):
        return (
            f"the deliveries name {' + '.join(d.device for d in stated)} but the devices are "
            f"{' + '.join(addition.devices) or 'none'}; make them agree"
        )
    if len(stated) > MAX_DELIVERIES:
        return (
            f"{len(stated)} deliveries, more than the {MAX_DELIVERIES} one addition may take "
            "(common practice); use a larger device"
        )
    total = math.fsum(d.volume_mL for d in stated)
    if abs(total - addition.volume_mL) > 1e-9 * max(1, len(stated)):
        return (
            f"the deliveries sum to {total:.6g} mL, not the addition's {addition.volume_mL:g} "
            "mL; correct the delivery volumes"
        )
    for d in stated:
        device = devices.get(d.device)
        if device is None:
            return f"{d.device} is not on the shelf"
        if not delivers(device, d.volume_mL):
            return (
                f"{d.device} cannot deliver {d.volume_mL:g} mL in one delivery (off its scale, "
                "below its least delivery or outside its range); choose a reading it delivers"
            )
    return None


def _delivery_problem(
    inputs: PlanInputs, devices: Mapping[str, Device], volume_mL: float, option: Sequence[str]
) -> str | None:
    """Why the named devices (all on the shelf) cannot deliver exactly this volume, or None
    when they can.

    A volume beyond what the devices hold together cannot be delivered; it is refused
    before the exact test, which counts in picolitres and would overflow on a number such
    as 1e308 mL. The exact test's search is bounded
    (:data:`planner.lab.deliveries.MAX_GRADED_SUMS`); an option beyond it is a finding too.
    """
    cannot = (
        f"cannot be delivered with {devices_text(option) or 'no device'}; choose a volume on "
        "the device's scale or another device"
    )
    capacity = sum(devices[d].volume_mL for d in option)
    if not option or not volume_mL <= capacity * (1 + 1e-9):
        return cannot
    try:
        deliverable = is_deliverable(inputs.glassware, volume_mL, option)
    except InvalidInputError as error:
        if error.field != "option":
            raise
        return f"not checked: {error.problem}; {error.hint}"
    return None if deliverable else cannot


def _volume_totals(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    design = inputs.design
    problems = []
    for m in mixtures:
        added = sum(a.volume_mL for a in m.additions)
        if abs(added - m.total_volume_mL) > _ATOL_VOLUME_mL:
            problems.append(
                f"{m.id}: additions sum to {added:.4f} mL, not the stated total "
                f"{m.total_volume_mL:g} mL"
            )
        if abs(m.total_volume_mL - design.total_volume_mL) > _ATOL_VOLUME_mL:
            problems.append(
                f"{m.id}: total {m.total_volume_mL:g} mL differs from the plan's "
                f"{design.total_volume_mL:g} mL"
            )
        orders = sorted(a.order for a in m.additions)
        if orders != list(range(1, len(m.additions) + 1)):
            problems.append(f"{m.id}: order of addition is not 1..{len(m.additions)}")
    return _check(
        "volume-totals",
        problems,
        f"additions of every mixture sum to {design.total_volume_mL:g} mL",
    )


def _close(stated: float, computed: float, rtol: float = _RTOL, atol: float = 1e-15) -> bool:
    return abs(stated - computed) <= atol + rtol * abs(computed)


def _concentrations(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    """Every stated initial and equilibrium concentration against a fresh solution.

    An ion or species the recomputation does not have, or has at zero, must be absent or
    zero; one it has above zero must be stated and agree.
    """
    problems = []
    reaction = inputs.reaction
    names = list(reaction.components) + list(reaction.species_names())
    known_ions = set(state.ions.names)
    known_names = set(names)
    for i, m in enumerate(mixtures):
        for k, ion in enumerate(state.ions.names):
            expected = float(state.initial[i, k])
            stated = m.initial_M.get(ion)
            if expected > 0:
                if stated is None or not _close(stated, expected):
                    problems.append(f"{m.id} initial {ion}: {_pair(stated, expected)} mol/L")
            elif stated is not None and stated != 0:
                problems.append(
                    f"{m.id} initial {ion}: stated {stated:.4g}, recomputed 0 mol/L (none of "
                    "its stocks is added)"
                )
        for ion in sorted(set(m.initial_M) - known_ions):
            if m.initial_M[ion] != 0:
                problems.append(
                    f"{m.id} initial {ion}: stated {m.initial_M[ion]:.4g} mol/L, but no stock "
                    "of the plan contains it"
                )
        recomputed = np.concatenate([state.free[i], state.species[i]])
        scale = max(float(np.max(state.components[i])), 1e-300)
        for name, value in zip(names, recomputed, strict=True):
            expected = float(value)
            stated = m.equilibrium_M.get(name)
            if stated is None:
                if expected != 0:
                    problems.append(f"{m.id} equilibrium {name}: {_pair(stated, expected)} mol/L")
            elif not _close(stated, expected, 1e-6, _ATOL_EQUILIBRIUM * scale):
                problems.append(f"{m.id} equilibrium {name}: {_pair(stated, expected)} mol/L")
        for name in sorted(set(m.equilibrium_M) - known_names):
            if m.equilibrium_M[name] != 0:
                problems.append(
                    f"{m.id} equilibrium {name}: stated {m.equilibrium_M[name]:.4g} mol/L, but "
                    "the reaction has no component or species of that name"
                )
    return _check(
        "concentrations",
        _listed(problems),
        "initial and equilibrium concentrations agree with a fresh mass-action solution",
    )


def _window(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    low, high = inputs.instrument.absorbance_window
    problems = []
    for i, m in enumerate(mixtures):
        computed = float(state.absorbance[i])
        if not _close(m.absorbance, computed, 1e-6, _ATOL_ABSORBANCE):
            problems.append(f"{m.id} absorbance: {_pair(m.absorbance, computed)}")
        if not _close(m.bound_fraction, float(state.bound[i]), 1e-6, 1e-9):
            problems.append(
                f"{m.id} bound fraction: {_pair(m.bound_fraction, float(state.bound[i]))}"
            )
        if m.role != "blank" and not low <= computed <= high:
            problems.append(
                f"{m.id} ({m.role}) reads {computed:.3f}, outside the window "
                f"{low:g}-{high:g}: change its limiting-reagent volume"
            )
        elif m.role != "blank" and math.isfinite(m.u_absorbance):
            # A real bench reads within +/- 2 u(A) of the prediction about 95 times in 100
            # (JCGM 100:2008, 6.3): that whole range belongs inside the window.
            margin = _MARGIN_U * m.u_absorbance
            if computed - margin < low or computed + margin > high:
                problems.append(
                    f"{m.id} ({m.role}) reads {computed:.3f} +/- {margin:.3f} (2 u(A)), which "
                    f"leaves the window {low:g}-{high:g} on a real bench: move it inward"
                )
    if not any(m.role != "blank" for m in mixtures):
        problems.append(
            "no standard or test to read: the shelf made none in the window (the design's "
            "design-feasibility check says which way the readings miss it and what to change)"
        )
    return _check(
        "absorbance-window",
        problems,
        f"every standard and test reads inside {low:g}-{high:g}, by at least 2 u(A)",
    )


def _standards_span(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    """The standards' blank-subtracted readings span at least half the window (common
    practice: a short curve fixes its slope poorly and hides curvature)."""
    low, high = inputs.instrument.absorbance_window
    blank = _blank_reading(mixtures, state)
    net = [
        float(state.absorbance[i]) - blank for i, m in enumerate(mixtures) if m.role == "standard"
    ]
    if len(net) < 2:
        return Check("standards-span", "pass", "one standard: no curve to span")
    span = max(net) - min(net)
    needed = _STANDARDS_SPAN * (high - low)
    if span + 1e-12 < needed:
        return Check(
            "standards-span",
            "fail",
            f"the standards' blank-subtracted readings span {span:.3f}, less than half the "
            f"window ({needed:.3f}): spread the limiting reagent's volumes, or use a "
            "pipette or buret that delivers a wider range",
        )
    return Check(
        "standards-span",
        "pass",
        f"the standards' blank-subtracted readings span {span:.3f} of the window's "
        f"{high - low:.3f}",
    )


def _blank_reading(mixtures: Sequence[Mixture], state: _State) -> float:
    """Mean reading of the reagent blanks (0 without one)."""
    readings = [float(state.absorbance[i]) for i, m in enumerate(mixtures) if m.role == "blank"]
    return sum(readings) / len(readings) if readings else 0.0


def _blank_check(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    """A reagent blank that reads high leaves less of the window to the product."""
    low, high = inputs.instrument.absorbance_window
    blank = _blank_reading(mixtures, state)
    left = high - max(blank, low)
    if blank > _HIGH_BLANK * (high - low):
        return Check(
            "blank-reading",
            "warn",
            f"the reagent blank reads {blank:.3f}, so the product has {left:.3f} of the "
            f"window's {high - low:.3f} left: the excess reagent or the medium absorbs; a "
            "less concentrated excess or another wavelength leaves more",
        )
    return Check("blank-reading", "pass", f"the reagent blank reads {blank:.3f}")


def _solve_and_read(
    inputs: PlanInputs,
    totals: np.ndarray,
    log_beta: np.ndarray | None = None,
    species_epsilon: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Free components, species, Beer-Lambert absorbance and photometer reading of component
    totals (n, n_components), re-derived here (this module keeps its own forward model on
    purpose, to check planner.forward's); ``log_beta`` and ``species_epsilon`` replace the
    plan's constants when given."""
    reaction = inputs.reaction
    logs = bench_log_beta(inputs) if log_beta is None else log_beta
    solved = solve_equilibrium(totals, reaction.stoichiometry(), logs)
    absorbers = np.concatenate([solved.species_M, solved.free_M], axis=1)
    species = reaction.species_epsilon() if species_epsilon is None else species_epsilon
    epsilon = np.concatenate([species, reaction.free_epsilon()])
    net = np.asarray(
        true_absorbance(absorbers, epsilon, inputs.instrument.path_length_cm), dtype=float
    )
    reading = np.asarray(observed_absorbance(net, inputs.instrument.stray_light), dtype=float)
    return solved.free_M, solved.species_M, net, reading


def reading_temperature_slope(inputs: PlanInputs, totals: np.ndarray) -> tuple[np.ndarray, float]:
    """d(reading)/dT of each mixture [1/K] and the benches' temperature SD [°C]: the van 't
    Hoff shift of verify's own constants (bench_log_beta) read through verify's own forward
    model, central difference of 0.01 K; zeros and 0 when no species gives an enthalpy."""
    sd = inputs.bench.temperature_sd_C
    if sd <= 0 or not any(sp.enthalpy_kJ_mol for sp in inputs.reaction.species):
        return np.zeros(len(totals)), 0.0
    room = inputs.session.temperature_C
    t = inputs.reaction.temperature_C if room is None else room
    h = 0.01
    up = _solve_and_read(inputs, totals, bench_log_beta(inputs, t + h))[3]
    down = _solve_and_read(inputs, totals, bench_log_beta(inputs, t - h))[3]
    return (up - down) / (2 * h), sd


# Relative step of the central difference of the reading (as any first-order budget may find
# one sensitivity numerically, JCGM 100:2008, 5.1.3 note 2).
_READING_STEP = 1e-6


def _reading_u(
    inputs: PlanInputs,
    mixture: Mixture,
    totals: np.ndarray,
    reading: float,
    devices: Mapping[str, Device],
    slope: np.ndarray,
    temperature_u: float,
) -> float | str:
    """u(A) of one mixture as the plan states it, or why it cannot be recomputed.

    u(A)^2 = sd(A)^2 + sum_z (sum_j dA/dT_j dT_j/dz u(z))^2 over the mixture's independent
    inputs z, sd(A) the three-term reading noise at the re-derived reading (plus the blank
    cuvette's offset for a blank), the bench technique's error in each delivery's random
    error (JCGM 100:2008, eq. 10): each stock's relative error (dT/dr_s = C_s V_s / V),
    each device's systematic error (its deliveries into the mixture add up), each delivery's
    random error (dT/dV_s = (C_s - T)/V in a tube, (C_s - C_d)/V in a flask made up to the
    mark with diluent d) and the flask's volume (dT/dV = (C_d - T)/V). dA/dT_j (``slope``)
    comes from :func:`_reading_slopes`, and ``temperature_u``, the reading's standard
    uncertainty from the bench's temperature (dA/dT times its SD), from
    :func:`reading_temperature_slope`. The error model is docs/methods.md section 10's; this
    derivation shares no code with the prediction stage.

    Repeated deliveries: an addition of n deliveries of one device (n full-scale fills and a
    remainder) adds n independent random delivery errors, in quadrature, and n times that
    device's systematic error, which every delivery of the device shares (assumption: the
    bench reads or sets each delivery afresh, so their random errors are independent; the
    catalogue's errors do not depend on the volume delivered, so a part-fill carries the
    same error as a full one).
    """
    components = inputs.reaction.components
    flask = inputs.flask  # the vessel, derived once from the validated inputs
    diluent = inputs.diluent
    stocks = {st.id: st for st in inputs.stocks}
    volume_mL = inputs.design.total_volume_mL
    concentration = {
        sid: np.array([st.contains_M.get(c, 0.0) for c in components]) for sid, st in stocks.items()
    }
    diluent_M = concentration[diluent.id] if diluent is not None else np.zeros(len(components))
    volume_of: dict[str, float] = defaultdict(float)
    columns: list[np.ndarray] = []
    u: list[float] = []
    systematic: dict[str, int] = {}
    for a in mixture.additions:
        if a.stock not in stocks:
            return f"adds {a.stock!r}, which is not a stock of the plan"
        volume_of[a.stock] += a.volume_mL
        if flask is not None and diluent is not None and a.stock == diluent.id:
            continue  # to the mark: the flask's volume, not a measured delivery
        if (
            not a.devices
            or any(d not in devices for d in a.devices)
            or (a.deliveries and _stated_deliveries_problem(devices, a) is not None)
            or (
                not a.deliveries
                and _delivery_problem(inputs, devices, a.volume_mL, a.devices) is not None
            )
        ):
            return f"cannot deliver {a.volume_mL:g} mL of {a.stock} as stated"
        reference = diluent_M if flask is not None else totals
        d_total = (concentration[a.stock] - reference) / volume_mL
        for device_id, each_mL in zip(a.devices, delivery_volumes_mL(a), strict=True):
            split = delivery_split_mL(devices[device_id])
            if split is None:
                return f"{device_id} does not measure a delivery"
            u_sys = split[0]
            # The device's random error and the bench technique's, independent.
            u_rand = math.hypot(split[1], technique_u_mL(inputs, devices[device_id], each_mL))
            if u_sys > 0:
                if device_id not in systematic:
                    systematic[device_id] = len(columns)
                    columns.append(np.zeros(len(components)))
                    u.append(u_sys)
                columns[systematic[device_id]] = columns[systematic[device_id]] + d_total
            if u_rand > 0:
                columns.append(d_total)
                u.append(u_rand)
    for stock_id, volume in volume_of.items():
        relative = stocks[stock_id].relative_uncertainty
        if relative > 0 and volume > 0:
            columns.append(concentration[stock_id] * volume / volume_mL)
            u.append(relative)
    if flask is not None:
        columns.append((diluent_M - totals) / volume_mL)
        u.append(standard_uncertainty_mL(flask))
    variance = reading_noise_sd(inputs, reading) ** 2
    variance += temperature_u**2  # the bench's temperature
    if mixture.role == "blank":
        variance += inputs.bench.blank_offset_sd**2  # the blank's cuvette against the samples'
    for column, value in zip(columns, u, strict=True):
        variance += (float(slope @ column) * value) ** 2
    return math.sqrt(variance)


def _reading_slopes(inputs: PlanInputs, totals: np.ndarray) -> np.ndarray:
    """dA/dT_j of each mixture's re-derived reading to each component total, shape
    (n, n_components) [L/mol]: central differences of step 1e-6 T_j (zero where T_j is zero),
    every mixture and component moved up and down in one solution of 2 n n_components
    mixtures (each mixture is solved on its own, so the batch changes no result)."""
    n, n_components = totals.shape
    if n == 0:
        return np.zeros((0, n_components))
    steps = _READING_STEP * totals
    moved = np.repeat(totals[:, None, None, :], n_components, axis=1)
    moved = np.repeat(moved, 2, axis=2)  # (n, component moved, up/down, component)
    for j in range(n_components):
        moved[:, j, 0, j] += steps[:, j]
        moved[:, j, 1, j] -= steps[:, j]
    readings = _solve_and_read(inputs, moved.reshape(-1, n_components))[3]
    up_down = readings.reshape(n, n_components, 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        slopes = (up_down[:, :, 0] - up_down[:, :, 1]) / (2.0 * steps)
    result: np.ndarray = np.where(steps > 0, slopes, 0.0)
    return result


def _reading_uncertainty(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    devices = devices_by_id(inputs.glassware)
    problems = []
    unchecked = []
    slopes = _reading_slopes(inputs, state.components)
    per_kelvin, temperature_sd = reading_temperature_slope(inputs, state.components)
    for i, m in enumerate(mixtures):
        computed = _reading_u(
            inputs,
            m,
            state.components[i],
            float(state.absorbance[i]),
            devices,
            slopes[i],
            float(per_kelvin[i]) * temperature_sd,
        )
        if isinstance(computed, str):
            # A recipe that cannot be made fails deliverable-volumes; its u(A) has no value.
            unchecked.append(m.id)
        elif not _close(m.u_absorbance, computed, _RTOL, 1e-15):
            problems.append(f"{m.id} u(A): {_pair(m.u_absorbance, computed)}")
    detail = (
        "every stated u(A) agrees with the reading noise and the composition's uncertainty "
        "from stocks, glassware and flask, read through the equilibrium and the photometer"
    )
    if unchecked:
        detail += (
            f", except {_names(unchecked)}, whose recipes cannot be delivered as stated "
            "(see deliverable-volumes)"
        )
    return _check("reading-uncertainty", _listed(problems), detail)


def _excess_partner(inputs: PlanInputs) -> tuple[str | None, float | None]:
    """Excess component and K of the 1:1 coloured product, when there is one."""
    reaction = inputs.reaction
    limiting = inputs.design.limiting
    for sp in sorted(reaction.species, key=lambda s: -s.epsilon):
        others = [c for c, n in sp.formula.items() if c != limiting and n]
        if sp.formula.get(limiting) == 1 and len(others) == 1 and sp.formula[others[0]] == 1:
            return others[0], float(10.0 ** bench_log_beta(inputs)[reaction.species.index(sp)])
    return None, None


#: Said after the assumption's shortfall when the plan is designed for the global fit.
GLOBAL_FIT_NOTE = "; the plan is designed for the global fit, which does not assume it"


def _all_bound_K_error(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> str:
    """The all-bound analysis's relative error in K on the recomputed state, as a phrase.

    The standard curve through the origin gives eps_app / eps = sum(c_s L_s) / sum(L_s^2)
    (c_s the 1:1 product, L_s the limiting total of standard s; least squares through the
    origin); each test then reads x = c_t / (eps_app / eps) and gives
    K_t = x / ((L_t - x)(M_t - x)) (the 1:1 mass-action law). Blank and stray light are left
    out, so this is the assumption's own share of the error.
    """
    excess, k_true = _excess_partner(inputs)
    reaction = inputs.reaction
    limiting = inputs.design.limiting
    standards = [i for i, m in enumerate(mixtures) if m.role == "standard"]
    tests = [i for i, m in enumerate(mixtures) if m.role == "test"]
    if (
        excess is None
        or k_true is None
        or not standards
        or not tests
        or inputs.measured_species.formula != {limiting: 1, excess: 1}
    ):
        return ""
    product = inputs.measured
    lim = reaction.components.index(limiting)
    exc = reaction.components.index(excess)
    c_std = state.species[standards, product]
    l_std = state.components[standards, lim]
    ratio = float(np.sum(c_std * l_std) / np.sum(l_std**2))
    x = state.species[tests, product] / ratio
    denominator = (state.components[tests, lim] - x) * (state.components[tests, exc] - x)
    if ratio <= 0:
        return "; on these standards the all-bound analysis would find no molar absorptivity"
    if np.any(denominator <= 0):
        # Said of the assumption alone (exact concentrations, no blank, no stray light): the
        # answer key's all-bound K, from the predicted readings, may still be a number.
        short = [
            f"{mixtures[t].id} ({limiting if x[k] >= state.components[t, lim] else excess})"
            for k, t in enumerate(tests)
            if denominator[k] <= 0
        ]
        return (
            "; from the exact concentrations the all-bound expression gives no positive K for "
            f"{', '.join(short)}: the standards' line infers more product than that reagent "
            "holds in the test"
        )
    error = float(np.mean(x / denominator)) / k_true - 1.0
    size = f"{100 * error:+.1f} %"
    if far_off(error):  # "-100.0 %" alone would hide a factor of a million
        size += f" (a factor of {1.0 + error:.2g})"
    return f"; the all-bound K errs by about {size} from it on this plan's tests"


def _assumption(
    inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State, analysis: str = "all-bound"
) -> Check:
    tolerance = inputs.design.assumption_tolerance
    indices = [i for i, m in enumerate(mixtures) if m.role == "standard"]
    if not indices:
        return Check("limiting-reagent-assumption", "fail", "no standards to check")
    fractions = state.bound[indices]
    worst = int(indices[int(np.argmin(fractions))])
    achieved = float(np.min(fractions))
    k_error = _all_bound_K_error(inputs, mixtures, state)
    if inputs.design.analysis == "global-fit" and achieved < 1.0 - tolerance:
        # The plan file asks for the global fit, which fits eps and K with the full
        # equilibrium model: it does not assume the standards all bound, so their shortfall
        # is information, not a fault.
        return Check(
            "limiting-reagent-assumption",
            "pass",
            "not needed: the plan is designed for the global fit, which does not assume the "
            f"standards all bound; they bind at least {100 * achieved:.2f} % of the limiting "
            f"reagent (the all-bound analysis's tolerance is {100 * tolerance:g} %){k_error}",
        )
    if achieved >= 1.0 - tolerance:
        return Check(
            "limiting-reagent-assumption",
            "pass",
            f"every standard binds at least {100 * achieved:.2f} % of the limiting reagent "
            f"(tolerance {100 * tolerance:g} %){k_error}",
        )
    detail = (
        f"standard {mixtures[worst].id} binds only {100 * achieved:.2f} % of the limiting "
        f"reagent, short of the {100 * (1 - tolerance):g} % the tolerance asks; a molar "
        f"absorptivity from these standards comes out about {100 * (1 - achieved):.1f} % low, "
        f"and K is biased with it{k_error}"
    )
    accept = checked_round_up(1.0 - achieved, lambda t: achieved >= 1.0 - t, digits=2)
    accept_text = f"accept a tolerance of {accept:.2g}" if accept is not None and accept < 1 else ""
    excess, _ = _excess_partner(inputs)
    if excess is None:
        detail += f". Fix: a larger excess{', or ' + accept_text if accept_text else ''}"
    else:
        detail += ". Fix: " + _excess_fix(inputs, mixtures, indices, excess, accept_text)
    if analysis == "global-fit":
        # The design switched to the global fit (the analysis check says so): the shortfall
        # and its fix stay in view, for a plan that wants the all-bound analysis back.
        return Check("limiting-reagent-assumption", "warn", detail + GLOBAL_FIT_NOTE)
    return Check("limiting-reagent-assumption", "fail", detail)


def _with_concentration(inputs: PlanInputs, stock_id: str, ion: str, value_M: float) -> PlanInputs:
    """A copy of the inputs with one ion of one stock at another concentration."""
    stocks = tuple(
        dataclasses.replace(st, contains_M={**st.contains_M, ion: value_M})
        if st.id == stock_id
        else st
        for st in inputs.stocks
    )
    return dataclasses.replace(inputs, stocks=stocks)


def _solve_concentration(
    c_now_M: float, passes: Callable[[float], bool], digits: int = 3
) -> float | None:
    """The smallest concentration from ``c_now_M`` up to :data:`LARGEST_DISSOLVED_M` that
    ``passes`` accepts, by bisection on log c (the bound fraction rises with the excess),
    rounded up to ``digits`` significant digits and accepted again; None when even
    LARGEST_DISSOLVED_M fails [mol/L]."""
    low, high = c_now_M, LARGEST_DISSOLVED_M
    if low >= high or not passes(high):
        return None
    for _ in range(60):
        if high / low < 1.0 + 1e-6:
            break
        middle = math.sqrt(low * high)
        if passes(middle):
            high = middle
        else:
            low = middle
    found = checked_round_up(high, passes, digits)
    return found if found is not None and found <= LARGEST_DISSOLVED_M else None


def _excess_fix(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    indices: Sequence[int],
    excess: str,
    accept_text: str,
) -> str:
    """The fix of a failed assumption check, solved for and checked again.

    For each stock of the excess reagent the standards use (the one giving the worst standard
    most of its excess first), the concentration that makes every standard meet the
    tolerance with the same volumes is found with the full equilibrium model, and the changed
    plan (a copy of the inputs) is re-mixed and solved again before it is offered. A fix
    above :data:`LARGEST_DISSOLVED_M` is impossible, and said so.
    """
    tolerance = inputs.design.assumption_tolerance
    standards = [mixtures[i] for i in indices]
    limiting = inputs.design.limiting

    def passes_with(stock_id: str) -> Callable[[float], bool]:
        def passes(c_M: float) -> bool:
            fixed = _with_concentration(inputs, stock_id, excess, c_M)
            return bool(np.min(_State(fixed, standards).bound) >= 1.0 - tolerance)

        return passes

    def contribution(st: Stock) -> float:
        return max(st.contains_M[excess] * m.volume_of(st.id) for m in standards)

    sources = sorted(
        (
            st
            for st in inputs.stocks
            if excess in st.contains_M
            and limiting not in st.contains_M
            and any(m.volume_of(st.id) > 0 for m in standards)
        ),
        key=lambda st: -contribution(st),
    )
    alternative = f", or {accept_text}" if accept_text else ""
    for st in sources:
        now = st.contains_M[excess]
        value = _solve_concentration(now, passes_with(st.id))
        if value is None:
            continue
        fixed = _State(_with_concentration(inputs, st.id, excess, value), standards)
        column = fixed.ions.names.index(excess)
        held = float(np.max(fixed.initial[:, column]))
        free = float(np.max(fixed.free[:, inputs.reaction.components.index(excess)]))
        text = (
            f"the {st.id} stock at {value:.3g} mol/L {excess} (now {now:.3g}) with the same "
            f"volumes, so that the standards hold up to {held:.3g} mol/L {excess} and every "
            f"one binds at least {100 * (1 - tolerance):g} % (solved with the equilibrium "
            f"model and checked again){alternative}"
        )
        if free > PRACTICAL_FREE_EXCESS_M:
            text += (
                f"; that stock leaves {free:.3g} mol/L of free {excess}, out of practical reach "
                "(above about 1 mol/L the excess reagent sets the medium), so plan the global "
                "fit: fit eps and K together with the exact equilibrium model"
            )
        return text
    names = _names([st.id for st in sources]) if sources else f"no stock of {excess}"
    return (
        f"impossible on this shelf by a stronger {excess} stock: even {LARGEST_DISSOLVED_M:g} "
        f"mol/L {excess} in {names} (the most a dissolved reagent reaches, common practice) "
        "leaves a standard short of the tolerance; plan the global fit (fit eps and K "
        f"together with the exact equilibrium model){alternative}"
    )


def _speciation(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    """Warn when products other than the coloured one hold a share the analysis ignores."""
    reaction = inputs.reaction
    holding = [
        i for i, sp in enumerate(reaction.species) if sp.formula.get(inputs.design.limiting, 0) > 0
    ]
    indices = [i for i, m in enumerate(mixtures) if m.role == "standard"]
    if not holding or not indices:
        return Check("product-speciation", "pass", "no standards or no product species")
    # The product the class measures, as the plan file names it or validation derived it
    # (not the most absorbing one: a plan measuring CuL+ whose standards form CuL2 must hear
    # that they do).
    coloured = inputs.measured
    if coloured not in holding:
        return Check("product-speciation", "pass", "the measured product holds no limiting reagent")
    name = reaction.species[coloured].name
    coefficient = reaction.species[coloured].formula[inputs.design.limiting]
    totals = state.limiting_total[indices]
    share = state.species[indices, coloured] * coefficient / np.where(totals > 0, totals, 1.0)
    others = state.bound[indices] - share
    worst = float(np.max(others))
    tolerance = inputs.design.assumption_tolerance
    if worst > tolerance:
        # The all-bound calibration reads A / (total / coefficient) as eps: every product's
        # absorbance over the limiting reagent counted as the measured product.
        epsilon = np.array([sp.epsilon for sp in reaction.species])
        read = state.species[indices] @ epsilon * coefficient / np.where(totals > 0, totals, 1.0)
        measured_epsilon = reaction.species[coloured].epsilon
        consequence = "its molar absorptivity means nothing"
        if measured_epsilon > 0:
            # A vanishing measured eps (5e-324 in the fuzz tests) overflows the ratio: the
            # reported eps then means nothing, as without one.
            with np.errstate(over="ignore"):
                error = read / measured_epsilon - 1.0
            off = float(error[np.argmax(np.abs(error))])
            if math.isfinite(off):
                consequence = (
                    f"the molar absorptivity it reports is off by up to {100 * off:+.0f} % "
                    "(the other products' absorptivities included)"
                )
        return Check(
            "product-speciation",
            "warn",
            f"up to {100 * worst:.1f} % of the limiting reagent in the standards is bound in "
            f"products other than {name}; the all-bound analysis counts it as {name}, so "
            f"{consequence}. Lower the excess towards where the other products are minor, or "
            "fit every species with the exact model",
        )
    return Check(
        "product-speciation",
        "pass",
        f"{name} holds at least {100 * float(np.min(share)):.2f} % of the limiting reagent in "
        "every standard",
    )


def _coverage(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    design = inputs.design
    low, high = design.bound_fraction_range
    indices = [i for i, m in enumerate(mixtures) if m.role == "test"]
    if not indices:
        return Check("bound-fraction-coverage", "warn", "no test mixtures")
    fractions = state.bound[indices]
    problems = []
    outside = [
        mixtures[i].id for i, f in zip(indices, fractions, strict=True) if not low <= f <= high
    ]
    if outside:
        problems.append(
            f"{_names(outside)} bound outside {low:g}-{high:g}, where K is poorly determined"
        )
    span = float(np.ptp(fractions))
    if len(indices) == 1:
        problems.append(
            f"one test, bound {float(fractions[0]):.2f}: a single bound fraction cannot show "
            "that K stays the same across the tests; ask for two or more (design.tests)"
        )
    elif span < design.bound_fraction_span - 1e-12:
        problems.append(
            f"the tests span {span:.2f} of bound fraction, less than the "
            f"{design.bound_fraction_span:g} asked: the constancy of K is weakly tested"
            + _coverage_fix(inputs, float(np.mean(fractions)))
        )
    return _check(
        "bound-fraction-coverage",
        problems,
        f"tests bound {float(np.min(fractions)):.2f}-{float(np.max(fractions)):.2f} "
        f"(span {span:.2f})",
        warn=True,
    )


def _coverage_fix(inputs: PlanInputs, mean_fraction: float) -> str:
    """What widens the tests' bound fractions on this shelf, as a ". Fix: ..." phrase.

    The bound fraction rises with the free excess reagent (K [M] / (1 + K [M]) for a 1:1
    product), so tests all bound above the middle need less of it in a tube (a more dilute
    stock, or a device that delivers less), and tests all below it need more.
    """
    excess, _ = _excess_partner(inputs)
    if excess is None:
        return ""
    if mean_fraction > 0.5:
        return (
            f". Fix: a more dilute stock of {excess} (or a device that delivers less of it) "
            "reaches lower bound fractions"
        )
    return f". Fix: a more concentrated stock of {excess} reaches higher bound fractions"


def _ionic_strength(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    problems = []
    for i, m in enumerate(mixtures):
        if not _close(m.ionic_strength_M, float(state.ionic_strength[i]), 1e-6):
            problems.append(
                f"{m.id} ionic strength: "
                f"{_pair(m.ionic_strength_M, float(state.ionic_strength[i]))} mol/L"
            )
    if problems:
        return Check("ionic-strength", "fail", "; ".join(problems))
    measured = [i for i, m in enumerate(mixtures) if m.role != "blank"]
    if not measured:
        return Check("ionic-strength", "pass", "no measured mixtures")
    values = state.ionic_strength[measured]
    spread = float((values.max() - values.min()) / values.max())
    if spread < 1e-9:  # round-off of sums of equal media, not a spread ("2.8e-14 %")
        spread = 0.0
    allowed = inputs.design.ionic_strength_spread
    medium = inputs.design.ionic_medium
    if medium is not None and spread <= 0.01:
        detail = (
            f"every mixture at ionic strength {values.max():.3g} mol/L (within "
            f"{100 * spread:.2g} %), the constant medium "
            f"of design.ionic_medium ({medium.salt}); the constants are moved there from the "
            f"{inputs.reaction.ionic_strength_M:g} mol/L they refer to"
        )
    else:
        low, high = f"{values.min():.3g}", f"{values.max():.3g}"
        detail = (
            f"ionic strength {low}-{high} mol/L across the mixtures"
            if low != high
            else f"every mixture at ionic strength {high} mol/L"
        ) + (
            f" (spread {100 * spread:.2g} %; the constants refer to "
            f"{inputs.reaction.ionic_strength_M:g} mol/L)"
        )
    if spread > allowed and not medium_matters(inputs.reaction, values):
        return Check(
            "ionic-strength",
            "pass",
            detail + ": no constant or molar absorptivity of this reaction moves with ionic "
            "strength across these mixtures (every product's delta z^2 is 0, and no SIT "
            "coefficient or epsilon_ionic_slope applies), so the spread moves no K",
        )
    if spread > allowed:
        return Check(
            "ionic-strength",
            "warn",
            detail + f", more than the {100 * allowed:.0f} % the plan allows: K changes with ionic "
            "strength, so make every stock in one medium at a higher background electrolyte, "
            "or use a less concentrated excess stock",
        )
    return Check("ionic-strength", "pass", detail)


def _expected_totals(
    inputs: PlanInputs, mixtures: Sequence[Mixture]
) -> dict[str, dict[str, float]]:
    """Stock volumes per bench, section, session and to prepare, from the recipes [mL].

    to_prepare = session x (1 + margin) + dead volume x bench containers, for a stock the
    recipes use, + what making the other stocks takes of it (``for_stocks``: the medium
    of every flask made and the aliquots of dilutions; docs/methods.md section 13).
    """
    session = inputs.session
    containers = session.sections * session.benches_per_section
    expected: dict[str, dict[str, float]] = {
        key: {} for key in ("per_bench", "per_section", "session", "to_prepare")
    }
    for st in inputs.stocks:
        # Summed mixture by mixture, as the design sums them, so the two agree to the bit.
        bench = sum(m.volume_of(st.id) for m in mixtures)
        expected["per_bench"][st.id] = bench
        expected["per_section"][st.id] = bench * session.benches_per_section * session.replicates
        expected["session"][st.id] = bench * session.sets
        expected["to_prepare"][st.id] = (
            bench * session.sets * (1 + session.margin) + session.dead_volume_mL * containers
            if bench > 0
            else 0.0
        )
    making = _stock_making(inputs, expected["to_prepare"])
    expected["for_stocks"] = making
    for stock_id, volume in making.items():
        expected["to_prepare"][stock_id] += volume
    return expected


def _stock_making(inputs: PlanInputs, for_mixtures: Mapping[str, float]) -> dict[str, float]:
    """What making the stocks takes of each stock [mL]: a dilution's aliquot (fraction x
    flask, per flask) from its source, then, for every flask made from a solid or by
    dilution, the flask's volume less the aliquot from the diluent (docs/methods.md
    section 13). Only stocks that serve are keys."""
    dilutions = _dilutions(inputs)
    taken: dict[str, float] = {}
    for target, (source, fraction) in dilutions.items():
        if for_mixtures[target] > 0:
            flask_mL, flasks = stock_flasks(for_mixtures[target])
            taken[source] = taken.get(source, 0.0) + flasks * fraction * flask_mL
    diluent = inputs.diluent
    if diluent is not None:
        medium = 0.0
        for st in inputs.stocks:
            volume = for_mixtures[st.id] + taken.get(st.id, 0.0)
            if st.diluent or volume <= 0 or (st.solid is None and st.id not in dilutions):
                continue
            flask_mL, flasks = stock_flasks(volume)
            fraction = dilutions[st.id][1] if st.id in dilutions else 0.0
            medium += flasks * flask_mL * (1.0 - fraction)
        if medium > 0:
            taken[diluent.id] = taken.get(diluent.id, 0.0) + medium
    return {k: v for k, v in taken.items() if v > 0}


# Relative agreement of every listed ion asked of a dilution (docs/methods.md section 13:
# concentrations typed to three or four digits; common practice).
_DILUTION_RTOL = 1e-3


def _dilutions(inputs: PlanInputs) -> dict[str, tuple[str, float]]:
    """Stocks without a solid made by diluting another with the medium: id -> (source id,
    fraction of the source). The fraction a solves c_target = a c_source + (1 - a) c_medium
    for the first reaction component (else ion, by name) whose source and medium
    concentrations differ, and must hold for every listed ion within 0.1 %, with
    0 < a < 0.999. Sources are stocks with a solid or that nothing else makes; the largest
    aliquot wins, then plan order."""
    diluent = inputs.diluent
    medium = dict(diluent.contains_M) if diluent is not None else {}
    components = set(inputs.reaction.components)
    shelf = [st for st in inputs.stocks if not st.diluent]

    def fraction_of(target: Stock, source: Stock) -> float | None:
        if target.id == source.id:
            return None
        names = set(target.contains_M) | set(source.contains_M) | set(medium)
        ordered = sorted(c for c in names if c in components) + sorted(
            c for c in names if c not in components
        )
        conc = [
            (target.contains_M.get(n, 0.0), source.contains_M.get(n, 0.0), medium.get(n, 0.0))
            for n in ordered
        ]
        differing = [(t, src, m) for t, src, m in conc if src != m]
        if not differing:
            return None
        t0, s0, m0 = differing[0]
        a = (t0 - m0) / (s0 - m0)
        if not 0.0 < a < 1.0 - _DILUTION_RTOL:
            return None
        for t, src, m in conc:
            if abs(a * src + (1.0 - a) * m - t) > _DILUTION_RTOL * max(t, src, m):
                return None
        return a

    def makers(target: Stock) -> list[tuple[int, Stock, float]]:
        found = []
        for n, source in enumerate(shelf):
            a = fraction_of(target, source)
            if a is not None:
                found.append((n, source, a))
        return found

    sources = {st.id for st in shelf if st.solid is not None or not makers(st)}
    result: dict[str, tuple[str, float]] = {}
    for st in shelf:
        if st.solid is None:
            usable = [(a, -n, src.id) for n, src, a in makers(st) if src.id in sources]
            if usable:
                a, _, source_id = max(usable)
                result[st.id] = (source_id, a)
    return result


def _stock_totals(inputs: PlanInputs, mixtures: Sequence[Mixture], totals: Totals) -> Check:
    session = inputs.session
    problems = []
    expected = _expected_totals(inputs, mixtures)
    for key, volumes in expected.items():
        for stock_id, value in volumes.items():
            stated = getattr(totals, key).get(stock_id)
            if stated is None or not _close(stated, value, 1e-9, 1e-9):
                problems.append(f"{key} {stock_id}: {_pair(stated, value)} mL")
    for stock_id in sorted(set(totals.for_stocks) - set(expected["for_stocks"])):
        problems.append(
            f"for_stocks {stock_id}: {_pair(totals.for_stocks[stock_id], 0.0)} mL (it makes "
            "no other stock)"
        )
    known = {st.id for st in inputs.stocks}
    for key in ("per_bench", "per_section", "session", "to_prepare", "for_stocks"):
        strangers = sorted(set(getattr(totals, key)) - known)
        if strangers:
            problems.append(f"{key} lists stocks the plan does not have: {_names(strangers)}")
    if not _close(totals.dead_volume_mL, session.dead_volume_mL, 1e-12, 1e-12):
        problems.append(
            f"dead volume: {_pair(totals.dead_volume_mL, session.dead_volume_mL)} mL "
            "(session.dead_volume_mL)"
        )
    return _check(
        "stock-totals",
        problems,
        f"per-bench totals x {session.sets} sets, + {100 * session.margin:g} % margin and "
        f"{session.dead_volume_mL:g} mL dead volume per bench container, + the medium and "
        "aliquots that make up the stocks",
    )


def inventory_check(inputs: PlanInputs, totals: Totals) -> Check:
    """The ``stock-inventory`` check of some totals: does every stock with an ``available_mL``
    cover what the totals ask to prepare? (Also run on the combined totals of all sections of
    ``planner variants``.)"""
    return _inventory(inputs, totals)


def _inventory(inputs: PlanInputs, totals: Totals) -> Check:
    problems = []
    for st in inputs.stocks:
        need = totals.to_prepare.get(st.id, 0.0)
        if st.available_mL is not None and need > st.available_mL + 1e-9:
            problems.append(
                f"{st.id}: {stock_volume_text(need)} mL needed, {st.available_mL:g} mL "
                f"available (short {stock_volume_text(need - st.available_mL)} mL): make more "
                "stock, or plan fewer benches or sections"
            )
    return _check("stock-inventory", problems, "every stock covers the session with its margin")


# Concentrations in a plan file are typed to three or four figures: a stock's ion counts as
# below the medium's beyond this relative shortfall (as for dilution recipes, methods.md
# section 13).
_COMPOSITION_RTOL = 1e-3


def _stock_composition(inputs: PlanInputs) -> Check:
    """Every stock made from a solid is made up to the mark with the medium (the diluent;
    docs/methods.md section 13), so it holds at least the medium's concentration of each of
    the medium's ions, the solid adding its own: a listed concentration below that disagrees
    with the prep sheet's recipe, and the ionic strength and every concentration of the plan
    follow the listed numbers. The plan file's own numbers are compared, before any salt of
    ``design.ionic_medium``."""
    diluent = inputs.diluent
    if diluent is None:
        return Check("stock-composition", "pass", "no medium to make the stocks up in")
    medium = diluent.plan_contains_M if diluent.plan_contains_M is not None else diluent.contains_M
    made = [st for st in inputs.stocks if st.solid is not None and not st.diluent]
    problems = []
    for st in made:
        own = st.plan_contains_M if st.plan_contains_M is not None else st.contains_M
        short = [
            (ion, own.get(ion, 0.0), c)
            for ion, c in medium.items()
            if own.get(ion, 0.0) < c * (1.0 - _COMPOSITION_RTOL)
        ]
        if short:
            listed = ", ".join(
                f"{ion} {given:g} (the medium {medium_M:g})" for ion, given, medium_M in short
            )
            problems.append(
                f"{st.id} is made from its solid up to the mark with {diluent.id}, so it holds "
                f"at least the medium's ions, but the plan file lists {listed} mol/L: list "
                "what the flask will hold, the medium's ions plus the solid's (unless the "
                "solid consumes some of them)"
            )
    return _check(
        "stock-composition",
        problems,
        f"every stock made from a solid lists at least the ions of {diluent.id}, the medium "
        "it is made up in"
        if made
        else "no stock is made from a solid",
        warn=True,
    )


def _cuvette(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    fill = inputs.instrument.cuvette_fill_mL
    short = [m.id for m in mixtures if m.total_volume_mL < fill]
    return _check(
        "cuvette-fill",
        [f"{_names(short)} hold less than the {fill:g} mL a cuvette needs"] if short else [],
        f"every mixture fills a cuvette ({fill:g} mL)",
    )


def _burets(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    """One stock per buret, and no more burets of a size in use than a bench has.

    A buret is filled with one stock for the session (common practice: refilling it with
    another stock between mixtures wastes stock and risks carry-over), so the stocks one
    buret entry serves need as many burets; the glassware entry's ``count`` is how many a
    bench has.
    """
    uses = _stocks_by_device(mixtures)
    counts = {d.id: d.count for d in inputs.glassware if d.kind == "buret"}
    problems = [
        f"{device} holds {len(stocks)} stocks ({_names(sorted(stocks))}) but a bench has "
        f"{counts[device]}: a buret holds one stock for the session; give each stock its own "
        "buret (raise the entry's count) or deliver one with another device"
        for device, stocks in sorted(uses.items())
        if device in counts and len(stocks) > counts[device]
    ]
    return _check("buret-per-stock", problems, "every buret holds one stock for the session")


def _stocks_by_device(mixtures: Sequence[Mixture]) -> dict[str, set[str]]:
    """The stocks each device delivers in the plan's mixtures, by device id."""
    uses: dict[str, set[str]] = defaultdict(set)
    for m in mixtures:
        for a in m.additions:
            for d in a.devices:
                uses[d].add(a.stock)
    return uses


def _device_count(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    uses = _stocks_by_device(mixtures)
    # Burets have their own, failing check (_burets): they cannot be rinsed between stocks.
    # A piston pipette takes a fresh disposable tip for each stock (common practice), so
    # one serves any number of stocks; the pipetting sheet says so.
    counts = {d.id: d.count for d in inputs.glassware if d.kind not in ("buret", "piston-pipette")}
    problems = [
        f"{device} serves {len(stocks)} stocks ({_names(sorted(stocks))}) but a bench has "
        f"{counts[device]}: give each stock its own, or rinse it with the next stock between uses"
        for device, stocks in sorted(uses.items())
        if device in counts and len(stocks) > counts[device]
    ]
    pistons = {d.id for d in inputs.glassware if d.kind == "piston-pipette"}
    shared = any(len(stocks) > 1 for device, stocks in uses.items() if device in pistons)
    return _check(
        "device-count",
        problems,
        "each stock has its own delivery device on every bench"
        + (", or a piston pipette with a fresh tip for each stock" if shared else ""),
        warn=True,
    )


def _expected_preparation(inputs: PlanInputs, stock: Stock, volume_mL: float) -> StockPreparation:
    """How the prep room makes one stock, from the inputs alone (docs/methods.md section 13).

    The mass of solid for one flask is m = c V M / purity (amount c V of the provided ion, one
    formula unit per ion; Harris, Quantitative Chemical Analysis, 9th ed., 2016, ch. 1), with
    the molar mass from the standard atomic weights (:func:`planner.chem.species.
    molar_mass_g_per_mol`).
    """
    flask_mL, flasks = stock_flasks(volume_mL)
    medium = medium_label(inputs.diluent)
    solid = stock.solid
    dilution = _dilutions(inputs).get(stock.id)
    salt = _expected_salt(inputs, stock, flask_mL, dilution)
    weighs_nothing: dict[str, Any] = {
        "solid_formula": "",
        "molar_mass_g_per_mol": 0.0,
        "purity": 1.0,
        "mass_g": 0.0,
    }
    if dilution is not None:
        reagent = [ion for ion in stock.contains_M if ion in inputs.reaction.components]
        return StockPreparation(
            stock=stock.id,
            flask_mL=flask_mL,
            flasks=flasks,
            provides=reagent[0] if reagent else "",
            concentration_M=stock.contains_M[reagent[0]] if reagent else 0.0,
            medium=medium,
            source=dilution[0],
            aliquot_mL=dilution[1] * flask_mL,
            **weighs_nothing,
            **salt,
        )
    if solid is None:
        return StockPreparation(
            stock=stock.id,
            flask_mL=flask_mL,
            flasks=flasks,
            provides="",
            concentration_M=0.0,
            medium="",  # supplied ready-made (or the medium itself): made up in nothing
            **weighs_nothing,
            **salt,
        )
    components = inputs.reaction.components
    provides = solid.provides or next(
        (ion for ion in stock.contains_M if ion in components), next(iter(stock.contains_M))
    )
    concentration = stock.contains_M.get(provides, 0.0)
    molar_mass = molar_mass_g_per_mol(solid.formula)
    return StockPreparation(
        stock=stock.id,
        flask_mL=flask_mL,
        flasks=flasks,
        solid_formula=solid.formula,
        molar_mass_g_per_mol=molar_mass,
        purity=solid.purity,
        mass_g=concentration * flask_mL / 1000.0 * molar_mass / solid.purity,
        provides=provides,
        concentration_M=concentration,
        medium=medium,
        **salt,
    )


def _expected_salt(
    inputs: PlanInputs, stock: Stock, flask_mL: float, dilution: tuple[str, float] | None = None
) -> dict[str, Any]:
    """The inert salt of ``design.ionic_medium`` for one flask, re-derived: the plan file's
    own stock made neutral with its counter-ions has I = 1/2 sum c z^2; a 1:1 salt adds its
    concentration to I, so c_salt = (I_target - I_stock) / (1/2 sum nu z^2) and
    m = c_salt V M (molar mass from the standard atomic weights). The flask is made up in the
    medium before its salt; a dilution's aliquot (fraction a of its source) brings a
    c_salt(source) of it."""
    medium = inputs.design.ionic_medium
    if medium is None:
        return {}
    per_mol = 0.5 * sum(
        n * charge_from_name(ion) ** 2 for ion, n in INERT_SALTS[medium.salt].items()
    )

    def needed(of: Stock) -> float:
        own = neutralised(of.contains_M if of.plan_contains_M is None else of.plan_contains_M)
        strength = 0.5 * sum(c * charge_from_name(ion) ** 2 for ion, c in own.items())
        return max(medium.ionic_strength_M - strength, 0.0) / per_mol

    salt_M = needed(stock)
    if dilution is not None:
        salt_M -= dilution[1] * needed(next(st for st in inputs.stocks if st.id == dilution[0]))
    if salt_M <= 0:
        return {}
    mass = salt_M * flask_mL / 1000.0 * molar_mass_g_per_mol(medium.salt)
    return {"salt_formula": medium.salt, "salt_M": salt_M, "salt_mass_g": mass}


def _text_key(key: str, text: str) -> object:
    """A preparation text in a form to compare: the medium's ions in any order.

    The saved inputs list a stock's ions in sorted order (the JSON has sorted keys) while the
    design wrote the medium in the plan file's order, so the order carries no meaning.
    """
    if key != "medium" or not text.endswith(")") or " (" not in text:
        return text
    name, _, parts = text[:-1].partition(" (")
    return (name, frozenset(parts.split(", ")))


# The numbers of a stock's preparation, with their units and relative tolerances: exact for
# what is copied from the inputs or counted, rounding only for the computed molar mass and mass.
_PREPARATION_NUMBERS = (
    ("flask_mL", "mL", 0.0),
    ("flasks", "", 0.0),
    ("molar_mass_g_per_mol", "g/mol", 1e-9),
    ("purity", "", 0.0),
    ("mass_g", "g", 1e-9),
    ("concentration_M", "mol/L", 0.0),
    ("aliquot_mL", "mL", 1e-9),
    ("salt_M", "mol/L", 1e-9),
    ("salt_mass_g", "g", 1e-9),
)
_PREPARATION_TEXTS = ("solid_formula", "provides", "medium", "source", "salt_formula")


def _preparation(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    stated: Sequence[StockPreparation] | None,
) -> Check:
    totals = _expected_totals(inputs, mixtures)
    # In a constant ionic medium the stocks are made up in the diluent before its salt, so a
    # salted diluent's flasks hold only what the benches take (docs/methods.md section 13);
    # a dilution's source is salted whole, its aliquots included.
    volumes = {
        st.id: totals["to_prepare"][st.id]
        - (totals["for_stocks"].get(st.id, 0.0) if st.diluent and st.medium_salt_M > 0 else 0.0)
        for st in inputs.stocks
    }
    expected = {
        st.id: _expected_preparation(inputs, st, volumes[st.id])
        for st in inputs.stocks
        if volumes[st.id] > 0
    }
    if stated is None:
        return Check(
            "preparation",
            "warn",
            f"the result states no preparation, though {len(expected)} stock(s) must be "
            "prepared: plan again to get the prep sheet",
        )
    problems = []
    counts = Counter(p.stock for p in stated)
    for stock_id in sorted(i for i, n in counts.items() if n > 1):
        problems.append(f"{stock_id} is listed {counts[stock_id]} times")
    for stock_id in [i for i in expected if i not in counts]:
        problems.append(f"{stock_id} is missing: {volumes[stock_id]:.0f} mL of it must be prepared")
    for p in stated:
        want = expected.get(p.stock)
        if want is None:
            why = "not a stock of the plan" if p.stock not in volumes else "not used"
            problems.append(f"{p.stock} is listed but {why}: nothing to prepare")
            continue
        for key, unit, rtol in _PREPARATION_NUMBERS:
            value, target = float(getattr(p, key)), float(getattr(want, key))
            if not _close(value, target, rtol, 0.0):
                problems.append(f"{p.stock} {key}: {_pair(value, target)} {unit}".rstrip())
        for key in _PREPARATION_TEXTS:
            text, target_text = getattr(p, key), getattr(want, key)
            if _text_key(key, text) != _text_key(key, target_text):
                problems.append(f"{p.stock} {key}: stated {text!r}, recomputed {target_text!r}")
    return _check(
        "preparation",
        _listed(problems),
        f"flasks, solids, purities, masses and dilutions of the {len(expected)} stock(s) to "
        "prepare agree with the inputs and the stock totals",
    )


# The prediction's numbers in the order the answer key gives them.
_PREDICTION_NUMBERS = (
    "epsilon",
    "u_epsilon",
    "K",
    "u_K",
    "K_bias_from_assumption",
    "K_true",
    "epsilon_true",
)


# Coverage factor of a 95 % range of a normal distribution (JCGM 100:2008, Table G.1).
_K95 = 1.960


def _meaningless(recomputed: RecomputedPrediction) -> list[str]:
    """The numbers of a recomputed prediction that would print as meaningless: a K, an eps,
    an uncertainty or the low end of a 95 % range that is not positive and finite."""
    fresh = recomputed.prediction
    values = {
        "eps": fresh.epsilon,
        "u(eps)": fresh.u_epsilon,
        "mean K": fresh.K,
        "u(K)": fresh.u_K,
        "low end of the range of eps": fresh.epsilon - _K95 * fresh.u_epsilon,
        "low end of the range of K": fresh.K - _K95 * fresh.u_K,
    }
    values.update({f"K of test {n}": k for n, k in enumerate(fresh.K_per_test, start=1)})
    return [
        f"{name} {value:.4g}"
        for name, value in values.items()
        if not (math.isfinite(value) and value > 0)
    ]


def _prediction(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    state: _State,
    stated: Prediction | None,
    analysis: str = "all-bound",
    stated_fit: GlobalFitPrediction | None = None,
) -> Check:
    """The ``prediction`` check: the analysis the plan is designed for, then the other one.

    For a plan designed for the global fit the all-bound block may be null, and must be when
    the all-bound analysis of the recipes gives meaningless numbers.
    """
    recomputed = recompute_prediction(
        inputs,
        mixtures,
        state.components,
        state.absorbance,
        reading_temperature_slope(inputs, state.components),
    )
    fit = _global_fit_prediction(inputs, mixtures, state, stated_fit)
    if analysis == "global-fit":
        if stated is None:
            return fit
        bound = _all_bound_prediction(inputs, mixtures, stated, recomputed)
    else:
        bound = _all_bound_prediction(inputs, mixtures, stated, recomputed)
    order = {"fail": 0, "warn": 1, "pass": 2}
    worst = min(bound.status, fit.status, key=order.__getitem__)
    return Check("prediction", worst, f"{bound.detail}; {fit.detail}")


_Stated = TypeVar("_Stated")
_Made = TypeVar("_Made")


# Per analysis: what its prediction is called, what a check says when none is stated nor
# made, and the unit and the advice after the fresh K when the result states none.
_PREDICTION_WORDS = {
    "global-fit": (
        "global-fit prediction",
        "no global-fit prediction stated",
        "): plan again to get it",
    ),
    "all-bound": (
        "prediction",
        "no prediction stated, and none made",
        " L/mol): plan again to get the answer key",
    ),
}


def _both_made(
    analysis: str,
    stated: _Stated | None,
    recomputed: _Made | str,
    found: Callable[[_Made], str],
) -> tuple[_Stated, _Made] | Check:
    """The stated and the fresh prediction when both exist, else the check naming the missing one.

    ``recomputed`` is the fresh derivation or the reason it gives none; ``found`` words the
    fresh K for the warning that the result states none.
    """
    label, none_made, advice = _PREDICTION_WORDS[analysis]
    if stated is None:
        if isinstance(recomputed, str):
            return Check("prediction", "pass", f"{none_made}: {recomputed}")
        return Check(
            "prediction",
            "warn",
            f"the result states no {label}, though the recipes give one ({found(recomputed)}"
            + advice,
        )
    if isinstance(recomputed, str):
        return Check(
            "prediction",
            "fail",
            f"the result states a {label}, but the recipes give none: {recomputed}",
        )
    return stated, recomputed


def _global_fit_prediction(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    state: _State,
    stated: GlobalFitPrediction | None,
) -> Check:
    """The global fit's eps, K and their uncertainties against an independent derivation."""
    listed = measured_deliveries(inputs, mixtures)
    recomputed = (
        listed
        if isinstance(listed, str)
        else recompute_global_fit(
            inputs,
            mixtures,
            state.components,
            lambda totals, logs, eps: _solve_and_read(inputs, totals, logs, eps)[3],
            listed,
            reading_temperature_slope(inputs, state.components),
        )
    )
    both = _both_made("global-fit", stated, recomputed, lambda m: f"K {m.K:.4g} ± {m.u_K:.2g}")
    if isinstance(both, Check):
        return both
    stated, recomputed = both
    problems = [
        f"global fit {key}: {_pair(float(getattr(stated, key)), float(getattr(recomputed, key)))}"
        for key in ("epsilon", "u_epsilon", "K", "u_K")
        if not _close(
            float(getattr(stated, key)), float(getattr(recomputed, key)), _RTOL_GLOBAL_FIT, 0.0
        )
    ]
    return _check(
        "prediction",
        problems,
        f"the global fit's eps {recomputed.epsilon:.4g} ± {recomputed.u_epsilon:.2g} L mol-1 "
        f"cm-1 and K {recomputed.K:.4g} ± {recomputed.u_K:.2g}"
        f"{' ' + inputs.measured_species.K_unit if inputs.measured_species.K_unit else ''} "
        "agree with a fresh derivation",
    )


def _bias_cause_problems(inputs: PlanInputs, stated: Prediction) -> list[str]:
    """The stated split of the all-bound bias by cause, against what it must satisfy.

    The first three shares multiply to the stated bias (checked above against a fresh
    derivation): (1 + a)(1 + b)(1 + c) = 1 + bias. The temperature's share is the constant at
    the benches' temperature over the one at the plan's, both in the benches' medium (van 't
    Hoff, :func:`planner.verify_prediction.bench_log_beta`). In a constant ionic medium every
    mixture shares it, so the medium's share is 0; otherwise it is not re-derived here.
    """
    causes = stated.K_bias_causes
    if causes is None:
        return []
    problems = []
    shares = (causes.all_bound_assumption, causes.absorbing_reagents, causes.stray_light)
    if all(math.isfinite(x) for x in shares):
        together = math.prod(1.0 + x for x in shares)
        if not _close(together, 1.0 + stated.K_bias_from_assumption, 1e-9, 0.0):
            problems.append(
                "K_bias_causes: the assumption's, the absorbers' and the stray light's shares "
                f"multiply to {together - 1.0:.6g}, not the stated bias "
                f"{stated.K_bias_from_assumption:.6g}"
            )
    m = inputs.measured
    log_ratio = bench_log_beta(inputs)[m] - bench_log_beta(inputs, inputs.reaction.temperature_C)[m]
    temperature = float(10.0**log_ratio) - 1.0
    if not _close(causes.temperature, temperature, 1e-9, 1e-12):
        problems.append(f"K_bias_causes.temperature: {_pair(causes.temperature, temperature)}")
    if inputs.design.ionic_medium is not None and causes.ionic_medium != 0.0:
        problems.append(
            f"K_bias_causes.ionic_medium: {causes.ionic_medium:.6g}, but in a constant ionic "
            "medium every mixture shares it (0)"
        )
    return problems


def _all_bound_prediction(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    stated: Prediction | None,
    recomputed: RecomputedPrediction | str,
) -> Check:
    """The all-bound analysis's prediction block against :func:`recompute_prediction`."""
    if isinstance(recomputed, RecomputedPrediction):
        meaningless = _meaningless(recomputed)
        if meaningless:
            return Check(
                "prediction",
                "fail",
                "the all-bound analysis of these recipes gives meaningless numbers ("
                + "; ".join(meaningless[:4])
                + "), so no answer key can state them: the standards are too far from all "
                "bound or the tests too close to it",
            )
    made = _both_made("all-bound", stated, recomputed, lambda m: f"mean K {m.prediction.K:.4g}")
    if isinstance(made, Check):
        return made
    stated, recomputed = made
    fresh = recomputed.prediction
    problems = []
    for key in _PREDICTION_NUMBERS:
        value, target = float(getattr(stated, key)), float(getattr(fresh, key))
        # The bias is a small difference (K/K_true - 1), so it is compared on K's scale.
        atol = _RTOL_PREDICTION if key == "K_bias_from_assumption" else 0.0
        if not _close(value, target, _RTOL_PREDICTION, atol + _NOISE * recomputed.rounding[key]):
            problems.append(f"{key}: {_pair(value, target)}")
    tests = [m.id for m in mixtures if m.role == "test"]
    if len(stated.K_per_test) != len(fresh.K_per_test):
        problems.append(
            f"K_per_test lists {len(stated.K_per_test)} values for {len(tests)} test mixtures"
        )
    else:
        for test_id, value, target, rounding in zip(
            tests,
            stated.K_per_test,
            fresh.K_per_test,
            recomputed.rounding_per_test,
            strict=True,
        ):
            if not _close(float(value), target, _RTOL_PREDICTION, _NOISE * rounding):
                problems.append(f"K_per_test of {test_id}: {_pair(float(value), target)}")
    problems.extend(_bias_cause_problems(inputs, stated))
    detail = (
        f"eps {fresh.epsilon:.4g} ± {fresh.u_epsilon:.2g} L mol-1 cm-1 and mean K "
        f"{fresh.K:.4g} ± {fresh.u_K:.2g} L/mol agree with a fresh derivation"
    )
    if not recomputed.rounding["K"] <= _RTOL_PREDICTION * abs(fresh.K):
        detail += (
            "; K is ill-conditioned here (its last digits change it by more than a millionth), "
            "so it is compared only as closely as rounding allows"
        )
    return _check("prediction", _listed(problems), detail)
