"""Stage results of a plan: recipes, their predicted state, totals, checks and prediction.

Frozen dataclasses passed from design to verification to prediction to the reports. Units are
in the names (``_M`` mol/L, ``_mL`` millilitres, ``_g`` grams); ``epsilon`` is a molar
absorptivity [L mol⁻¹ cm⁻¹] and ``K`` a formation constant [L/mol].
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import field
from typing import Literal, get_args

from planner.inputs import PlanInputs
from planner.lab.deliveries import Delivery
from planner.records import record

__all__ = [
    "CHECK_STATUSES",
    "COVERAGE_FACTOR_95",
    "ROLES",
    "Addition",
    "BiasCauses",
    "Budget",
    "Check",
    "Contributor",
    "Delivery",
    "GlobalFitPrediction",
    "MediumEffect",
    "Mixture",
    "MixtureUncertainty",
    "Plan",
    "Prediction",
    "Role",
    "Status",
    "StockPreparation",
    "StockRole",
    "Totals",
    "UncertaintyResult",
    "devices_text",
    "stock_volume_text",
]

#: Coverage factor of a 95 % interval for a normal distribution, k = 1.960 (JCGM 100:2008,
#: Table G.1) [unitless].
COVERAGE_FACTOR_95 = 1.960
#: The role of a mixture: the reagent blank, a calibration standard or a test mixture.
Role = Literal["blank", "standard", "test"]
#: Mixture roles, in the order sheets list them.
ROLES: tuple[Role, ...] = get_args(Role)
#: The status of a check (the JSON's ``checks[].status``).
Status = Literal["fail", "warn", "pass"]
#: Check statuses, worst first.
CHECK_STATUSES: tuple[Status, ...] = get_args(Status)
#: A stock's part in the order of addition: the diluent, the stock that brings the limiting
#: reagent, or one that brings the reagent in excess.
StockRole = Literal["diluent", "limiting", "excess"]


def devices_text(devices: Sequence[str]) -> str:
    """A delivery's devices as people read them, on every screen, sheet and message.

    Each device is named by its id as the plan file's glassware gives it (DESIGN.md contract
    detail 5: ``transfer-pipette-2mL``, ``buret-25mL``), the one name a device has in the
    JSON, the terminal, the sheets and the checks; a repeated delivery is counted, in order
    of first use: ``2 × transfer-pipette-2mL + transfer-pipette-0.5mL``.
    """
    counts: dict[str, int] = {}
    for device_id in devices:
        counts[device_id] = counts.get(device_id, 0) + 1
    return " + ".join(
        device_id if count == 1 else f"{count} × {device_id}" for device_id, count in counts.items()
    )


def stock_volume_text(volume_mL: float) -> str:
    """A stock volume in a message or a sheet's verdict, the same on both: whole millilitres
    from 10 mL, two significant figures below (``1206``, ``81``, ``4.2``, ``0.35``).

    A shortfall and a spare are differences of the totals, so they are never given to more
    figures than the totals carry ("short 1206 mL" of 1806 needed and 600 available, not
    "1210").
    """
    if abs(volume_mL) >= 10:
        return f"{volume_mL:.0f}"
    return f"{volume_mL:.2g}"


@record
class Addition:
    """One stock delivered into a mixture.

    Attributes
    ----------
    stock
        Stock id.
    volume_mL
        Volume delivered [mL].
    devices
        Device ids used, one per delivery (a repeated delivery repeats the id); for the
        diluent "to the mark" of a flask, the flask's id.
    order
        Position in the order of addition, from 1.
    deliveries
        The deliveries in the order they are made, each a device id and the volume that
        delivery gives [mL]: a graded device may deliver n times full scale and then the
        remainder. Their devices are ``devices`` and their volumes sum to ``volume_mL``; for
        the diluent to the mark of a flask, the flask with the volume it makes up. Empty when
        not stated (a saved plan from before deliveries were listed).
    """

    stock: str
    volume_mL: float
    devices: tuple[str, ...]
    order: int
    deliveries: tuple[Delivery, ...] = ()


@record
class Mixture:
    """A recipe and its predicted state.

    Attributes
    ----------
    id
        ``B1``, ``S1``..., ``T1``...
    role
        One of :data:`ROLES`.
    total_volume_mL
        Final volume [mL].
    additions
        The deliveries, in order of addition.
    initial_M
        Concentration of every ion after mixing, before reaction [mol/L] (counter-ions
        included).
    equilibrium_M
        Every reaction component (free) and every product species at equilibrium [mol/L].
    absorbance
        Predicted photometer reading, stray light applied, blank not subtracted [unitless].
    u_absorbance
        Predicted standard uncertainty of that reading [unitless].
    bound_fraction
        Fraction of the limiting reagent in product species, weighted by coefficient
        [unitless].
    ionic_strength_M
        Ionic strength after reaction [mol/L].
    """

    id: str
    role: Role
    total_volume_mL: float
    additions: tuple[Addition, ...]
    initial_M: dict[str, float]
    equilibrium_M: dict[str, float]
    absorbance: float
    u_absorbance: float
    bound_fraction: float
    ionic_strength_M: float

    @property
    def absorbance_ci95(self) -> tuple[float, float]:
        """Range a class will likely read, value -/+ 1.96 u(A) (JCGM 100:2008, 6.3) [unitless]."""
        half = COVERAGE_FACTOR_95 * self.u_absorbance
        return (self.absorbance - half, self.absorbance + half)

    def volume_of(self, stock_id: str) -> float:
        """Total volume of one stock in this mixture [mL]."""
        return sum(a.volume_mL for a in self.additions if a.stock == stock_id)


@record
class Check:
    """One finding of verification.

    Attributes
    ----------
    name
        Stable check name, e.g. ``absorbance-window``.
    status
        ``pass``, ``warn`` or ``fail``.
    detail
        What was found and, when not passing, what would fix it.
    """

    name: str
    status: Status
    detail: str


@record
class Totals:
    """Stock volumes the plan needs [mL], keyed by stock id.

    Attributes
    ----------
    per_bench
        One set of mixtures.
    per_section
        per_bench x benches_per_section x replicates.
    session
        per_bench x benches_per_section x sections x replicates.
    to_prepare
        session x (1 + margin) + dead volume per bench container, + ``for_stocks``.
    dead_volume_mL
        The dead volume assumed per stock and bench container [mL].
    for_stocks
        What the prep room uses of a stock to make up the others [mL]: the medium that fills
        their flasks to the mark, and the aliquots that dilution recipes take from it. Only
        stocks that serve so are keys.
    """

    per_bench: dict[str, float]
    per_section: dict[str, float]
    session: dict[str, float]
    to_prepare: dict[str, float]
    dead_volume_mL: float
    for_stocks: dict[str, float] = field(default_factory=dict)


@record
class StockPreparation:
    """How the prep room makes one stock.

    Attributes
    ----------
    stock
        Stock id.
    flask_mL
        Volumetric flask size to make it in [mL].
    flasks
        How many such flasks cover ``to_prepare``.
    solid_formula
        Solid to weigh, or ``""`` when the stock is not made from a listed solid.
    molar_mass_g_per_mol
        Molar mass of the solid [g/mol] (0 when no solid).
    purity
        Mass fraction of the compound in the reagent [unitless].
    mass_g
        Mass of solid per flask [g] (0 when no solid).
    provides
        The ion the solid provides.
    concentration_M
        Target concentration of that ion [mol/L].
    medium
        The medium to make it up in (the diluent's composition), for the label.
    source
        For a stock made by dilution, the stock it is diluted from; ``""`` otherwise (made
        from its solid, or supplied ready-made when it has neither solid nor source).
    aliquot_mL
        For a dilution, the volume of ``source`` per flask, made up to the mark with the
        medium [mL]; 0 otherwise.
    salt_formula
        The inert salt of ``design.ionic_medium`` to add, or ``""``.
    salt_M
        Its concentration in the stock [mol/L] (0 when none).
    salt_mass_g
        Mass of that salt per flask [g] (0 when none).
    """

    stock: str
    flask_mL: float
    flasks: int
    solid_formula: str
    molar_mass_g_per_mol: float
    purity: float
    mass_g: float
    provides: str
    concentration_M: float
    medium: str
    source: str = ""
    aliquot_mL: float = 0.0
    salt_formula: str = ""
    salt_M: float = 0.0
    salt_mass_g: float = 0.0


@record
class Prediction:
    """What the all-bound analysis (limiting reagent all bound in the standards) will report.

    Attributes
    ----------
    epsilon
        Mean molar absorptivity from the standard curve [L mol⁻¹ cm⁻¹].
    u_epsilon
        Its standard uncertainty [L mol⁻¹ cm⁻¹].
    K
        Mean K over the test mixtures [L/mol].
    u_K
        Its standard uncertainty [L/mol].
    K_bias_from_assumption
        Relative bias of that K against the true one [unitless].
    K_true
        The K the plan assumes [L/mol].
    epsilon_true
        The molar absorptivity the plan assumes for the coloured product [L mol⁻¹ cm⁻¹].
    K_per_test
        The K each test mixture gives under the all-bound analysis [L/mol].
    u_K_per_test
        Standard uncertainty of each test's K [L/mol].
    epsilon_intercept
        Molar absorptivity from the standard curve fitted with an intercept
        [L mol⁻¹ cm⁻¹], or None when not predicted.
    u_epsilon_intercept
        Its standard uncertainty [L mol⁻¹ cm⁻¹], or None.
    epsilon_ci95
        Range a class will likely report for eps, (low, high), 95 % [L mol⁻¹ cm⁻¹], or None.
    K_ci95
        Range a class will likely report for the mean K, 95 % [L/mol], or None.
    K_per_test_ci95
        Range of each test's K, 95 % [L/mol].
    absorbance_ci95
        Range of each mixture's reading, 95 %, keyed by mixture id [unitless].
    K_bias_causes
        ``K_bias_from_assumption`` split by cause, and the ionic medium's share said apart
        (:class:`BiasCauses`), or None when not predicted.
    """

    epsilon: float
    u_epsilon: float
    K: float
    u_K: float
    K_bias_from_assumption: float
    K_true: float
    epsilon_true: float
    K_per_test: tuple[float, ...] = ()
    u_K_per_test: tuple[float, ...] = ()
    epsilon_intercept: float | None = None
    u_epsilon_intercept: float | None = None
    epsilon_ci95: tuple[float, float] | None = None
    K_ci95: tuple[float, float] | None = None
    K_per_test_ci95: tuple[tuple[float, float], ...] = ()
    absorbance_ci95: dict[str, tuple[float, float]] = field(default_factory=dict)
    K_bias_causes: BiasCauses | None = None


@record
class GlobalFitPrediction:
    """What the global fit of one bench's readings will report (first order).

    The fit of eps and K with the full equilibrium model to every standard and test reading
    returns the plan's values from noise-free readings, so the prediction is those values with
    the standard uncertainties of the first-order budget.

    Attributes
    ----------
    epsilon, u_epsilon
        Molar absorptivity of the measured product and its standard uncertainty
        [L mol⁻¹ cm⁻¹].
    K, u_K
        Its formation constant (beta, in its own units) and standard uncertainty.
    """

    epsilon: float
    u_epsilon: float
    K: float
    u_K: float

    @property
    def epsilon_ci95(self) -> tuple[float, float]:
        """Range a class will likely report for eps, value -/+ 1.96 u [L mol⁻¹ cm⁻¹]."""
        half = COVERAGE_FACTOR_95 * self.u_epsilon
        return (self.epsilon - half, self.epsilon + half)

    @property
    def K_ci95(self) -> tuple[float, float]:
        """Range a class will likely report for K, value -/+ 1.96 u."""
        half = COVERAGE_FACTOR_95 * self.u_K
        return (self.K - half, self.K + half)


@record
class Contributor:
    """One input's contribution to a measurand's uncertainty.

    Attributes
    ----------
    input
        What the input is, e.g. ``"reading of T3"`` or ``"buret-25mL delivering thiocyanate
        into S2"``.
    kind
        ``"stock"``, ``"device-systematic"``, ``"delivery-random"``, ``"flask"``,
        ``"temperature"`` or ``"reading"``.
    standard_uncertainty
        u of the input, in ``unit``.
    unit
        ``"relative"`` (stock concentrations), ``"mL"`` or ``"absorbance"``.
    sensitivity
        Sensitivity coefficient of the measurand to the input [measurand unit per input unit].
    contribution
        |sensitivity| x u [measurand unit].
    share
        Fraction of the measurand's variance from this input [unitless]; the shares sum to 1.
    formula
        The sensitivity coefficient as the chain of model derivatives, each given by the
        formula sympy derived.
    """

    input: str
    kind: str
    standard_uncertainty: float
    unit: str
    sensitivity: float
    contribution: float
    share: float
    formula: str


@record
class Budget:
    """The uncertainty budget of one measurand.

    Attributes
    ----------
    measurand
        ``"epsilon"`` (curve through the origin), ``"epsilon_intercept"`` or ``"K"`` (mean K).
    value
        Estimate the all-bound analysis gives from the predicted readings [``unit``].
    standard_uncertainty
        Combined standard uncertainty [``unit``].
    unit
        ``"L mol-1 cm-1"`` or ``"L/mol"``.
    contributors
        Every input with a non-zero contribution, largest first.
    """

    measurand: str
    value: float
    standard_uncertainty: float
    unit: str
    contributors: tuple[Contributor, ...]

    @property
    def ci95(self) -> tuple[float, float]:
        """value -/+ 1.96 u, the 95 % interval of a normal distribution [``unit``]."""
        half = COVERAGE_FACTOR_95 * self.standard_uncertainty
        return (self.value - half, self.value + half)


@record
class MixtureUncertainty:
    """First-order uncertainty of one mixture's composition and reading.

    Attributes
    ----------
    id
        Mixture id.
    totals_M
        Nominal total of each component [mol/L].
    u_totals_M
        Its standard uncertainty from stocks, deliveries and final volume [mol/L].
    absorbance
        Predicted reading (stray light applied, blank not subtracted) [unitless].
    u_absorbance
        Standard uncertainty of the reading: the composition's uncertainty through the
        equilibrium and the photometer, plus the reading noise [unitless].
    """

    id: str
    totals_M: dict[str, float]
    u_totals_M: dict[str, float]
    absorbance: float
    u_absorbance: float

    @property
    def absorbance_ci95(self) -> tuple[float, float]:
        """The reading's 95 % interval, absorbance -/+ 1.96 u [unitless]."""
        half = COVERAGE_FACTOR_95 * self.u_absorbance
        return (self.absorbance - half, self.absorbance + half)


@record
class MediumEffect:
    """The ionic medium's share of the bias (:mod:`planner.predict.medium`).

    Attributes
    ----------
    ionic_strength_M
        Ionic strength of each mixture as made up, in plan order [mol/L].
    K_in_medium
        The measured species' constant in each mixture's medium (Davies up to 0.5 mol/L,
        SIT above), at the benches' temperature [L/mol].
    K_bias_all_bound, K_bias_global_fit
        Relative change of each analysis's K when every mixture's constants are those of its
        own medium rather than the reference medium's [unitless]; nan when the analysis gives
        no finite K.
    """

    ionic_strength_M: tuple[float, ...]
    K_in_medium: tuple[float, ...]
    K_bias_all_bound: float
    K_bias_global_fit: float


@record
class BiasCauses:
    """The all-bound K's relative bias split by cause (:mod:`planner.predict.bias`) [unitless].

    Attributes
    ----------
    all_bound_assumption
        The standards' limiting reagent taken as fully bound, alone.
    absorbing_reagents
        Added by the other absorbers (other products, free reagents).
    stray_light
        Added by the photometer's stray light.
    ionic_medium
        Added by each mixture's own ionic medium (:class:`MediumEffect`).
    temperature
        The constant at the benches' temperature against the one the plan gives, at its own.
    """

    all_bound_assumption: float
    absorbing_reagents: float
    stray_light: float
    ionic_medium: float
    temperature: float


@record
class UncertaintyResult:
    """The first-order prediction of the all-bound analysis.

    Attributes
    ----------
    epsilon
        Budget of the molar absorptivity from the curve through the origin.
    epsilon_intercept
        Budget of the molar absorptivity from the curve with an intercept.
    K
        Budget of the mean K (with eps from the curve through the origin).
    K_per_test
        (K, u(K)) of each test mixture, in plan order [L/mol].
    mixtures
        Per mixture composition and reading uncertainty, in plan order.
    K_true
        K the plan assumes [L/mol].
    epsilon_true
        Molar absorptivity the plan assumes [L mol⁻¹ cm⁻¹].
    test_ids
        Ids of the test mixtures, in plan order.
    global_fit_epsilon, global_fit_K
        Budgets of the global fit's eps and K (the fit of every standard and test reading with
        the full equilibrium model), or None when eps and K cannot be separated.
    medium
        The ionic medium's share of the bias of each analysis (shown apart from the
        all-bound assumption's).
    bias_causes
        The all-bound K's bias split by cause.
    """

    epsilon: Budget
    epsilon_intercept: Budget
    K: Budget
    K_per_test: tuple[tuple[float, float], ...]
    mixtures: tuple[MixtureUncertainty, ...]
    K_true: float
    epsilon_true: float
    test_ids: tuple[str, ...] = field(default=())
    global_fit_epsilon: Budget | None = None
    global_fit_K: Budget | None = None
    medium: MediumEffect | None = None
    bias_causes: BiasCauses | None = None

    @property
    def K_bias_from_assumption(self) -> float:
        """Relative bias of the mean K against the true K [unitless]."""
        return self.K.value / self.K_true - 1.0


@record
class Plan:
    """A finished plan: inputs, mixtures, totals, preparation, checks and prediction.

    ``design_objective`` is the value of the test-set objective the design minimised (by
    default the predicted relative standard uncertainty of the mean K, u(K)/K [unitless]); None
    when not designed.
    ``uncertainty`` is the whole first-order prediction (every budget and every mixture's
    u(A)) the prediction stage made; ``prediction`` and each mixture's ``u_absorbance`` are
    read from it (``prediction`` is None when its numbers would mean nothing, the budget is
    still kept for ``planner simulate``). None for a plan that cannot be analysed or was read
    back from a file. ``analysis`` is the analysis the tests were designed for (``"all-bound"``
    or ``"global-fit"``, see :func:`planner.design.plan.design_recipes`) and ``global_fit``
    what the global fit will report (None when its numbers would mean nothing).
    """

    inputs: PlanInputs
    mixtures: tuple[Mixture, ...]
    totals: Totals
    preparations: tuple[StockPreparation, ...]
    checks: tuple[Check, ...]
    prediction: Prediction | None
    notes: tuple[str, ...] = field(default=())
    design_objective: float | None = None
    uncertainty: UncertaintyResult | None = None
    analysis: str = "all-bound"
    global_fit: GlobalFitPrediction | None = None

    @property
    def failed(self) -> bool:
        """True when some check failed (the exit status is then 1)."""
        return any(c.status == "fail" for c in self.checks)

    @property
    def K_at_benches(self) -> float:
        """The measured species' K at the benches (their temperature and, with a constant
        ionic medium, that medium): the value a class should find. Both analyses' predictions
        carry it; without either, the plan file's constant."""
        if self.prediction is not None:
            return self.prediction.K_true
        if self.global_fit is not None:
            return self.global_fit.K
        return float(10.0**self.inputs.measured_species.log_beta)

    @property
    def expected_K(self) -> tuple[float, float] | None:
        """(K, u(K)) of the analysis the plan is designed for, as its answer key prints them,
        or None when that analysis gives none."""
        if self.analysis == "global-fit":
            fit = self.global_fit
            return None if fit is None else (fit.K, fit.u_K)
        prediction = self.prediction
        return None if prediction is None else (prediction.K, prediction.u_K)

    def by_role(self, role: Role) -> tuple[Mixture, ...]:
        """The mixtures of one role, in plan order."""
        return tuple(m for m in self.mixtures if m.role == role)
