"""Independent re-check of a finished plan from first principles.

Nothing here calls the optimiser or the prediction (this module imports neither
:mod:`planner.design` nor :mod:`planner.predict`): every recipe is re-mixed from its additions,
re-solved and re-read, every volume is checked against the devices it names and the shelf,
and every total is recomputed. The findings are the plan's ``checks``: data, never
exceptions.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence

import numpy as np

from planner.chem.assumption import min_excess_M
from planner.chem.equilibrium import bound_fraction, solve_equilibrium
from planner.chem.mixing import ion_table, ionic_strength_after_reaction_M, mix_M
from planner.inputs import PlanInputs
from planner.lab.glassware import is_deliverable
from planner.lab.photometer import observed_absorbance, true_absorbance
from planner.result import Check, Mixture, Totals

__all__ = ["CHECK_NAMES", "verify_plan"]

#: Stable names of the checks, in the order they are run.
CHECK_NAMES = (
    "mixture-count",
    "deliverable-volumes",
    "volume-totals",
    "concentrations",
    "absorbance-window",
    "limiting-reagent-assumption",
    "product-speciation",
    "bound-fraction-coverage",
    "ionic-strength",
    "stock-totals",
    "stock-inventory",
    "cuvette-fill",
    "device-count",
)

# Relative agreement required between stated and recomputed numbers: JSON keeps full float
# precision, so anything beyond rounding (1e-12) is an edit or a bug; 1e-7 leaves room for
# the solver's own 1e-10 mass-balance tolerance.
_RTOL = 1e-7
_ATOL_ABSORBANCE = 1e-7
_ATOL_VOLUME_mL = 1e-6


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
    inputs: PlanInputs, mixtures: Sequence[Mixture], totals: Totals
) -> tuple[Check, ...]:
    """Re-check every recipe, reading and total of a plan.

    Parameters
    ----------
    inputs
        The validated plan inputs.
    mixtures
        The plan's mixtures with their stated state.
    totals
        The plan's stated stock totals.

    Returns
    -------
    tuple of Check
        One per name in :data:`CHECK_NAMES`, in that order.
    """
    checks = [
        _mixture_count(inputs, mixtures),
        _deliverable(inputs, mixtures),
        _volume_totals(inputs, mixtures),
    ]
    recomputed = _recompute(inputs, mixtures)
    checks.append(_concentrations(inputs, mixtures, recomputed))
    checks.append(_window(inputs, mixtures, recomputed))
    checks.append(_assumption(inputs, mixtures, recomputed))
    checks.append(_speciation(inputs, mixtures, recomputed))
    checks.append(_coverage(inputs, mixtures, recomputed))
    checks.append(_ionic_strength(inputs, mixtures, recomputed))
    checks.append(_stock_totals(inputs, mixtures, totals))
    checks.append(_inventory(inputs, totals))
    checks.append(_cuvette(inputs, mixtures))
    checks.append(_device_count(inputs, mixtures))
    return tuple(checks)


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
        solved = solve_equilibrium(self.components, matrix, reaction.log_beta())
        self.free = solved.free_M
        self.species = solved.species_M
        absorbers = np.concatenate([self.species, self.free], axis=1)
        epsilon = np.concatenate([reaction.species_epsilon(), reaction.free_epsilon()])
        self.absorbance = np.asarray(
            observed_absorbance(
                true_absorbance(absorbers, epsilon, inputs.instrument.path_length_cm),
                inputs.instrument.stray_light,
            ),
            dtype=float,
        )
        limiting = reaction.components.index(inputs.design.limiting)
        self.bound = bound_fraction(self.species, matrix, limiting, self.components)
        self.limiting_total = self.components[:, limiting]
        self.ionic_strength = ionic_strength_after_reaction_M(
            self.ions, self.initial, reaction, self.free, self.species
        )


def _recompute(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> _State:
    return _State(inputs, mixtures)


def _check(name: str, problems: list[str], ok_detail: str, *, warn: bool = False) -> Check:
    if not problems:
        return Check(name, "pass", ok_detail)
    return Check(name, "warn" if warn else "fail", "; ".join(problems))


def _mixture_count(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    design = inputs.design
    counts = {
        role: sum(1 for m in mixtures if m.role == role) for role in ("blank", "standard", "test")
    }
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
    ids = [m.id for m in mixtures]
    duplicates = sorted({i for i in ids if ids.count(i) > 1})
    if duplicates:
        problems.append(f"mixture ids used twice: {_names(duplicates)}")
    bad_roles = [m.id for m in mixtures if m.role not in ("blank", "standard", "test")]
    if bad_roles:
        problems.append(f"unknown role for {_names(bad_roles)}: use blank, standard or test")
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
        f"{counts['blank']} blank, {counts['standard']} standards, {counts['test']} tests",
    )


def _deliverable(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    shelf = {d.id for d in inputs.glassware}
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
            elif not a.devices or not is_deliverable(inputs.glassware, a.volume_mL, a.devices):
                problems.append(
                    f"{where}: cannot be delivered with {' + '.join(a.devices) or 'no device'}; "
                    "choose a volume on the device's scale or another device"
                )
    return _check(
        "deliverable-volumes",
        problems,
        "every volume is deliverable with the devices named, all on the shelf",
    )


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
    problems = []
    reaction = inputs.reaction
    names = list(reaction.components) + list(reaction.species_names())
    for i, m in enumerate(mixtures):
        for k, ion in enumerate(state.ions.names):
            expected = float(state.initial[i, k])
            stated = m.initial_M.get(ion)
            if expected > 0 and (stated is None or not _close(stated, expected)):
                problems.append(f"{m.id} initial {ion}: {_pair(stated, expected)} mol/L")
        recomputed = np.concatenate([state.free[i], state.species[i]])
        scale = max(float(np.max(state.components[i])), 1e-300)
        for name, expected in zip(names, recomputed, strict=True):
            stated = m.equilibrium_M.get(name)
            if stated is None or not _close(stated, float(expected), 1e-6, 1e-9 * scale):
                problems.append(
                    f"{m.id} equilibrium {name}: {_pair(stated, float(expected))} mol/L"
                )
    return _check(
        "concentrations",
        problems[:8] + ([f"and {len(problems) - 8} more"] if len(problems) > 8 else []),
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
    if not any(m.role != "blank" for m in mixtures):
        problems.append(
            "no mixture reaches the window: use a more concentrated limiting stock, a longer "
            "path length, or glassware that delivers larger volumes"
        )
    return _check(
        "absorbance-window",
        problems,
        f"every standard and test reads inside {low:g}-{high:g}",
    )


def _excess_partner(inputs: PlanInputs) -> tuple[str | None, float | None]:
    """Excess component and K of the 1:1 coloured product, when there is one."""
    reaction = inputs.reaction
    limiting = inputs.design.limiting
    for sp in sorted(reaction.species, key=lambda s: -s.epsilon):
        others = [c for c, n in sp.formula.items() if c != limiting and n]
        if sp.formula.get(limiting) == 1 and len(others) == 1 and sp.formula[others[0]] == 1:
            return others[0], 10.0**sp.log_beta
    return None, None


def _assumption(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    tolerance = inputs.design.assumption_tolerance
    indices = [i for i, m in enumerate(mixtures) if m.role == "standard"]
    if not indices:
        return Check("limiting-reagent-assumption", "fail", "no standards to check")
    fractions = state.bound[indices]
    worst = int(indices[int(np.argmin(fractions))])
    achieved = float(np.min(fractions))
    if achieved >= 1.0 - tolerance:
        return Check(
            "limiting-reagent-assumption",
            "pass",
            f"every standard binds at least {100 * achieved:.2f} % of the limiting reagent "
            f"(tolerance {100 * tolerance:g} %)",
        )
    detail = (
        f"standard {mixtures[worst].id} binds only {100 * achieved:.2f} % of the limiting "
        f"reagent, short of the {100 * (1 - tolerance):g} % the tolerance asks; a molar "
        f"absorptivity from these standards comes out about {100 * (1 - achieved):.1f} % low, "
        "and K is biased with it"
    )
    excess, k = _excess_partner(inputs)
    if excess is not None and k is not None:
        needed = min_excess_M(k, float(state.limiting_total[worst]), tolerance)
        column = state.ions.names.index(excess)
        have = float(state.initial[worst, column])
        stock_volume = {
            st.id: mixtures[worst].volume_of(st.id)
            for st in inputs.stocks
            if excess in st.contains_M
        }
        main = max(stock_volume, key=lambda s: stock_volume[s]) if stock_volume else None
        if main and stock_volume[main] > 0:
            factor = needed / max(have, 1e-300)
            stronger = inputs.stock(main).contains_M[excess] * factor
            detail += (
                f". Fix: an excess of {needed:.3g} mol/L {excess} in the standards (now "
                f"{have:.3g}), e.g. the {main} stock at no less than {stronger:.3g} mol/L with the "
                f"same volumes, or accept a tolerance of {1 - achieved:.3g}"
            )
            if needed - (1 - tolerance) * float(state.limiting_total[worst]) > 1.0:
                detail += (
                    "; that excess is out of practical reach (above about 1 mol/L of free "
                    "excess), so plan the corrected analysis: fit eps and K together with the "
                    "exact equilibrium model"
                )
    else:
        detail += f". Fix: a larger excess, or accept a tolerance of {1 - achieved:.3g}"
    return Check("limiting-reagent-assumption", "fail", detail)


def _speciation(inputs: PlanInputs, mixtures: Sequence[Mixture], state: _State) -> Check:
    """Warn when products other than the coloured one hold a share the analysis ignores."""
    reaction = inputs.reaction
    holding = [
        i for i, sp in enumerate(reaction.species) if sp.formula.get(inputs.design.limiting, 0) > 0
    ]
    indices = [i for i, m in enumerate(mixtures) if m.role == "standard"]
    if not holding or not indices:
        return Check("product-speciation", "pass", "no standards or no product species")
    coloured = max(holding, key=lambda i: (reaction.species[i].epsilon, -i))
    name = reaction.species[coloured].name
    coefficient = reaction.species[coloured].formula[inputs.design.limiting]
    totals = state.limiting_total[indices]
    share = state.species[indices, coloured] * coefficient / np.where(totals > 0, totals, 1.0)
    others = state.bound[indices] - share
    worst = float(np.max(others))
    tolerance = inputs.design.assumption_tolerance
    if worst > tolerance:
        return Check(
            "product-speciation",
            "warn",
            f"up to {100 * worst:.1f} % of the limiting reagent in the standards is bound in "
            f"products other than {name}; the usual analysis counts it as {name}, so its molar "
            f"absorptivity comes out about {100 * (1 - float(np.min(share))):.0f} % low. Lower "
            "the excess towards where the other products are minor, or fit every species "
            "with the exact model",
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
    if len(indices) > 1 and span < design.bound_fraction_span - 1e-12:
        problems.append(
            f"the tests span {span:.2f} of bound fraction, less than the "
            f"{design.bound_fraction_span:g} asked: the constancy of K is weakly tested"
        )
    return _check(
        "bound-fraction-coverage",
        problems,
        f"tests bound {float(np.min(fractions)):.2f}-{float(np.max(fractions)):.2f} "
        f"(span {span:.2f})",
        warn=True,
    )


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
    allowed = inputs.design.ionic_strength_spread
    detail = (
        f"ionic strength {values.min():.3g}-{values.max():.3g} mol/L across the mixtures "
        f"(spread {100 * spread:.0f} %; the constants refer to "
        f"{inputs.reaction.ionic_strength_M:g} mol/L)"
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


def _stock_totals(inputs: PlanInputs, mixtures: Sequence[Mixture], totals: Totals) -> Check:
    session = inputs.session
    problems = []
    containers = session.sections * session.benches_per_section
    for st in inputs.stocks:
        bench = sum(m.volume_of(st.id) for m in mixtures)
        expected = {
            "per_bench": bench,
            "per_section": bench * session.benches_per_section * session.replicates,
            "session": bench * session.sets,
            "to_prepare": (
                bench * session.sets * (1 + session.margin) + session.dead_volume_mL * containers
                if bench > 0
                else 0.0
            ),
        }
        for key, value in expected.items():
            stated = getattr(totals, key).get(st.id)
            if stated is None or not _close(stated, value, 1e-9, 1e-9):
                problems.append(f"{key} {st.id}: {_pair(stated, value)} mL")
    known = {st.id for st in inputs.stocks}
    for key in ("per_bench", "per_section", "session", "to_prepare"):
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
        f"{session.dead_volume_mL:g} mL dead volume per bench container",
    )


def _inventory(inputs: PlanInputs, totals: Totals) -> Check:
    problems = []
    for st in inputs.stocks:
        need = totals.to_prepare.get(st.id, 0.0)
        if st.available_mL is not None and need > st.available_mL + 1e-9:
            problems.append(
                f"{st.id}: {need:.0f} mL needed, {st.available_mL:g} mL available (short "
                f"{need - st.available_mL:.0f} mL): make more stock, or plan fewer benches or "
                "sections"
            )
    return _check("stock-inventory", problems, "every stock covers the session with its margin")


def _cuvette(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    fill = inputs.instrument.cuvette_fill_mL
    short = [m.id for m in mixtures if m.total_volume_mL < fill]
    return _check(
        "cuvette-fill",
        [f"{_names(short)} hold less than the {fill:g} mL a cuvette needs"] if short else [],
        f"every mixture fills a cuvette ({fill:g} mL)",
    )


def _device_count(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Check:
    uses: dict[str, set[str]] = defaultdict(set)
    for m in mixtures:
        for a in m.additions:
            for d in a.devices:
                uses[d].add(a.stock)
    counts = {d.id: d.count for d in inputs.glassware}
    problems = [
        f"{device} serves {len(stocks)} stocks ({_names(sorted(stocks))}) but a bench has "
        f"{counts[device]}: give each stock its own, or rinse it with the next stock between uses"
        for device, stocks in sorted(uses.items())
        if device in counts and len(stocks) > counts[device]
    ]
    return _check(
        "device-count",
        problems,
        "each stock has its own delivery device on every bench",
        warn=True,
    )
