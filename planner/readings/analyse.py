"""A class's readings against the plan: each bench analysed, flagged, explained; the class pooled.

Pure functions from readings (:mod:`planner.readings.table`) and saved plans
(:class:`planner.resultfile.SavedPlan`, one per section) to :class:`ClassAnalysis`. Every
number comes from the two analyses of :mod:`planner.analysis` (the all-bound analysis and the
global fit, vectorised over the benches of a section), and every predicted range from the
saved plan (``plan.json``): each mixture's reading and u(A), the ``prediction`` block (eps, K
and, when the plan states them, K per test) and the ``global_fit_prediction`` block.

Flag rules (each a :class:`Flag` with its threshold and source; ``docs/guide.md`` lists them):

``missing-mixture``
    A mixture of the plan has no accepted reading (an empty cell or a rejected row).
``reading-outside-window``
    A standard or test reading outside the photometer's linear window (the plan's
    ``instrument.absorbance_window``).
``standard-off-line``
    A standard off the standard line through the other standards (the plan's all-bound
    analysis), or off the bench's global fit (a plan designed for the global fit, whose
    standards need not lie on a line), by more than :data:`OFF_LINE_U` standard
    uncertainties of that residual (propagated from the plan's u(A)), Bonferroni-corrected
    over the bench's standards. The standard furthest off is left out of the lines (or the
    fit), as long as one is off, so that one wrong standard is named alone and with its
    distance from the line or fit of the others (:func:`_unmask`).
``readings-scaled``
    Every reading scaled by one factor: the least-squares factor between the bench's
    blank-subtracted readings and the predicted ones, and the median of their ratios
    (:func:`_median_ratio`), differ from 1 by more than :data:`COVERAGE_FLAG` u(eps)/eps
    while every standard lies on its line.
``test-K-outside-range``
    A test's all-bound K more than :data:`COVERAGE_FLAG` of its predicted standard
    uncertainties from its predicted value, Bonferroni-corrected over the bench's tests.
``K-trend-with-bound-fraction``
    The tests' all-bound K rise or fall with their bound fraction beyond what the plan
    predicts: the weighted slope of K minus its predicted value against bound fraction is
    more than :data:`TREND_T` standard errors from zero (weights from the predicted u(K) of
    each test).
``global-fit-failed``
    The global fit did not converge inside 1.5 decades of the plan's K.
``mixtures-swapped``
    Two mixtures each read as the other's prediction (:func:`_swaps`).
``blank-offset``
    Every blank-subtracted standard and test reading off its prediction by one amount
    (:func:`_offset`).

A swap or an offset explains a whole bench: its flag comes first and the bench's other flags
are those of its readings with the slip undone; a bench with a standard off the line has its
tests judged on the curve without that standard (:func:`_explained`).

Coverage: a flag fires at 3 standard uncertainties (about 99.7 % for a normal variable,
JCGM 100:2008, G.1.3, from memory), so that a class of thirty benches with six rules each
raises few false flags; the 95 % ranges of the answer key are reported beside every value.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections.abc import Callable, Mapping, Sequence
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from planner.analysis import (
    GlobalFitTable,
    Layout,
    all_bound_epsilon,
    all_bound_mean_K,
    global_fit_batch,
    global_fit_residuals,
    global_fit_sets,
    global_fit_start_offset,
    global_fit_starts,
    global_fit_table,
)
from planner.errors import InvalidInputError
from planner.predict._experiment import bench_experiment
from planner.readings.table import BenchKey, Reading, ReadingsTable, Rejection
from planner.records import record
from planner.result import COVERAGE_FACTOR_95
from planner.resultfile import SavedPlan

__all__ = [
    "COVERAGE_FLAG",
    "OFF_LINE_U",
    "TREND_T",
    "BenchResult",
    "ClassAnalysis",
    "ClassStatistic",
    "Estimate",
    "Flag",
    "MixtureResult",
    "Pooled",
    "analyse_class",
]

#: A standard this many u(A) off its line is flagged (common practice: 3 sigma).
OFF_LINE_U = 3.0
#: Coverage factor of the flag rules on eps and K (common practice: 3 sigma).
COVERAGE_FLAG = 3.0
#: |slope / standard error| of K against bound fraction that flags a trend (common practice).
TREND_T = 3.0

Status = Literal["ok", "flagged"]


@record
class Flag:
    """One finding on a bench: what rule fired, its likely cause and the evidence.

    Attributes
    ----------
    rule
        The rule's name (see the module notes).
    mixtures
        The mixtures concerned (empty when the whole bench is).
    cause
        The likely cause, in words.
    evidence
        The numbers that fired the rule.
    threshold
        The rule's threshold and its source.
    """

    rule: str
    mixtures: tuple[str, ...]
    cause: str
    evidence: str
    threshold: str


@record
class Estimate:
    """A bench's value beside the range its section's answer key gives.

    Attributes
    ----------
    value
        The bench's value (NaN when it cannot be computed).
    predicted
        The predicted value (NaN when the plan has no prediction).
    low, high
        The predicted 95 % range (NaN when none).
    """

    value: float
    predicted: float
    low: float
    high: float

    @property
    def inside(self) -> bool | None:
        """Whether the value lies in the predicted range; None when either is missing."""
        if not (math.isfinite(self.value) and math.isfinite(self.low)):
            return None
        return self.low <= self.value <= self.high


@record
class MixtureResult:
    """One mixture of a bench.

    Attributes
    ----------
    id, role
        The mixture.
    reading
        The bench's reading, NaN when missing [unitless].
    expected
        Its predicted reading and 95 % range (plan.json: absorbance -/+ 1.96 u(A)).
    u_absorbance
        The plan's u(A) [unitless].
    residual
        Reading minus the bench's global fit (blank-subtracted), NaN for the blank, a missing
        reading or a failed fit [unitless].
    line_residual
        Standards: reading minus the standard line through the other standards, NaN
        otherwise [unitless].
    u_residual
        Standards: the standard uncertainty of that residual (or, on a plan designed for
        the global fit, of the global-fit residual), propagated from the plan's u(A) of the
        readings it is made of; NaN otherwise [unitless].
    K
        Tests: the all-bound K of this test and its predicted range; NaN otherwise.
    bound_fraction
        The plan's bound fraction of the limiting reagent [unitless].
    """

    id: str
    role: str
    reading: float
    expected: Estimate
    u_absorbance: float
    residual: float
    line_residual: float
    u_residual: float
    K: Estimate
    bound_fraction: float


@record
class BenchResult:
    """One bench's set of mixtures, analysed.

    Attributes
    ----------
    section, bench, replicate
        Which set.
    epsilon_all_bound, K_all_bound
        The all-bound analysis (curve through the origin, K averaged over the tests) beside
        the plan's ``prediction``.
    epsilon_global_fit, K_global_fit
        The global fit beside the plan's ``global_fit_prediction``.
    mixtures
        Every mixture of the plan, in plan order.
    scale
        Least-squares factor between the mixtures' blank-subtracted readings and the
        predicted ones (NaN when it cannot be computed) [unitless].
    flags
        What was found.
    rows
        Rows of the readings file this bench's readings came from.
    """

    section: int
    bench: int
    replicate: int
    epsilon_all_bound: Estimate
    K_all_bound: Estimate
    epsilon_global_fit: Estimate
    K_global_fit: Estimate
    mixtures: tuple[MixtureResult, ...]
    scale: float
    flags: tuple[Flag, ...]
    rows: tuple[int, ...]

    @property
    def status(self) -> Status:
        """``ok`` without flags, else ``flagged``."""
        return "flagged" if self.flags else "ok"


@record
class ClassStatistic:
    """A quantity over the class's accepted benches, beside the prediction.

    Attributes
    ----------
    n
        Benches with a value.
    mean, sd
        Mean and sample standard deviation (NaN below two benches).
    low, high
        mean -/+ 1.96 SD: the range the class's benches spread over, 95 % if normal.
    predicted, predicted_low, predicted_high
        The sections' predicted value (their mean) and the envelope of their 95 % ranges.
    """

    n: int
    mean: float
    sd: float
    low: float
    high: float
    predicted: float
    predicted_low: float
    predicted_high: float


@record
class Pooled:
    """The global fit of every accepted reading of the class at once.

    Attributes
    ----------
    epsilon, u_epsilon, K, u_K
        Fitted values and standard uncertainties (least-squares covariance).
    n_readings, n_benches
        Readings fitted (blank-subtracted standards and tests) and benches they came from.
    includes_flagged
        False: the benches that are ok. True: no bench was ok, so every analysed bench was
        pooled (a class that disagrees with the plan as a whole, e.g. a K far from the
        plan's, flags every bench; the pooled fit then says what the class measured).
    rms_residual
        Root mean square of the residuals [unitless].
    lack_of_fit_F, lack_of_fit_p, df_lack_of_fit, df_pure_error
        The lack-of-fit F test with the benches of a section as replicates (Draper and
        Smith, Applied Regression Analysis, 3rd ed., 1998, section 2.1, from memory): the
        spread of each mixture's mean about the model against the spread of the benches
        about each mixture's mean. NaN (and dfs of 0) when there are no replicates.
    """

    epsilon: float
    u_epsilon: float
    K: float
    u_K: float
    n_readings: int
    n_benches: int
    includes_flagged: bool
    rms_residual: float
    lack_of_fit_F: float
    lack_of_fit_p: float
    df_lack_of_fit: int
    df_pure_error: int


@record
class ClassAnalysis:
    """A class's readings, analysed.

    Attributes
    ----------
    benches
        Every bench's set of mixtures with at least one reading, by section, bench, replicate.
    rejections
        Rows of the readings file left out, and why.
    unmeasured
        (section, bench, replicate) of sets whose cells are all empty.
    lost
        Sets with rows in the file, every one of them rejected: results given but none
        usable (they count as flagged for the exit status).
    absent
        Sets the plan has, in sections with rows in the file, of which the file has no row
        at all; at most :data:`ABSENT_LISTED` per section are listed, ``n_absent`` counts
        them all.
    n_absent
        How many sets ``absent`` stands for.
    sections_without_rows
        Sections of the plan of which the file has no row.
    K_all_bound, K_global_fit, epsilon_all_bound, epsilon_global_fit
        Over the benches that are ok.
    pooled
        The pooled global fit of the ok benches' readings, or None when no bench is ok.
    K_true
        The K the plan assumes (the measured species' beta).
    sections
        The sections analysed.
    K_unit
        The unit of K (the measured species' beta), e.g. ``"L/mol"``.
    """

    benches: tuple[BenchResult, ...]
    rejections: tuple[Rejection, ...]
    unmeasured: tuple[BenchKey, ...]
    lost: tuple[BenchKey, ...]
    absent: tuple[BenchKey, ...]
    n_absent: int
    sections_without_rows: tuple[int, ...]
    K_all_bound: ClassStatistic
    K_global_fit: ClassStatistic
    epsilon_all_bound: ClassStatistic
    epsilon_global_fit: ClassStatistic
    pooled: Pooled | None
    K_true: float
    sections: tuple[int, ...]
    K_unit: str = ""

    @property
    def flagged(self) -> bool:
        """True when any bench is flagged or any set's rows were all rejected."""
        return any(b.flags for b in self.benches) or bool(self.lost)


# ---------------------------------------------------------------------------------------------
# What each section's plan predicts
# ---------------------------------------------------------------------------------------------

_NAN = math.nan
_NO_RANGE = (_NAN, _NAN)


def _range(value: float, u: float) -> tuple[float, float]:
    half = COVERAGE_FACTOR_95 * u
    return (value - half, value + half)


def _u_of(interval: tuple[float, float]) -> float:
    """The standard uncertainty behind a 95 % range (half-width / 1.96)."""
    return (interval[1] - interval[0]) / (2.0 * COVERAGE_FACTOR_95)


@record
class _Section:
    """One section's plan as the analysis needs it."""

    saved: SavedPlan
    layout: Layout
    ids: tuple[str, ...]
    roles: tuple[str, ...]
    predicted: NDArray[np.float64]
    u_absorbance: NDArray[np.float64]
    bound_fraction: NDArray[np.float64]
    epsilon_all_bound: tuple[float, float, float]
    K_all_bound: tuple[float, float, float]
    K_tests: tuple[tuple[float, float, float], ...]
    epsilon_global_fit: tuple[float, float, float]
    K_global_fit: tuple[float, float, float]


def _test_ranges(saved: SavedPlan) -> tuple[tuple[float, float, float], ...]:
    """Each test's predicted all-bound K and 95 % range.

    plan.json states each test's K; its range is taken from the plan when the plan states it
    (``K_per_test_ci95``), else from the first-order budget of the saved recipes
    (:func:`planner.predict.uncertainty.propagate`, the budget that printed the answer key).
    """
    prediction = saved.prediction
    if prediction is None:
        return ()
    ranges: Sequence[tuple[float, float]] = prediction.K_per_test_ci95
    if not ranges:
        from planner.predict.uncertainty import propagate

        try:
            budget = propagate(saved.inputs, saved.mixtures)
        except InvalidInputError:
            return ()
        ranges = [_range(k, u) for k, u in budget.K_per_test]
    return tuple(
        (k, low, high) for k, (low, high) in zip(prediction.K_per_test, ranges, strict=False)
    )


def _section(saved: SavedPlan) -> _Section:
    ex = bench_experiment(saved.inputs, saved.mixtures)
    p = saved.prediction
    g = saved.global_fit
    if p is not None:
        eps_range = p.epsilon_ci95 or _range(p.epsilon, p.u_epsilon)
        k_range = p.K_ci95 or _range(p.K, p.u_K)
        eps_ab = (p.epsilon, *eps_range)
        k_ab = (p.K, *k_range)
    else:
        eps_ab = k_ab = (_NAN, *_NO_RANGE)
    return _Section(
        saved=saved,
        layout=ex.layout,
        ids=tuple(m.id for m in saved.mixtures),
        roles=tuple(m.role for m in saved.mixtures),
        predicted=np.array([m.absorbance for m in saved.mixtures]),
        u_absorbance=np.array([m.u_absorbance for m in saved.mixtures]),
        bound_fraction=np.array([m.bound_fraction for m in saved.mixtures]),
        epsilon_all_bound=eps_ab,
        K_all_bound=k_ab,
        K_tests=_test_ranges(saved),
        epsilon_global_fit=(g.epsilon, *g.epsilon_ci95) if g else (_NAN, *_NO_RANGE),
        K_global_fit=(g.K, *g.K_ci95) if g else (_NAN, *_NO_RANGE),
    )


def _estimate(value: float, predicted: tuple[float, float, float]) -> Estimate:
    return Estimate(float(value), *predicted)


# ---------------------------------------------------------------------------------------------
# The benches of one section, by the pattern of readings they have
# ---------------------------------------------------------------------------------------------


def _sub_layout(layout: Layout, rows: NDArray[np.int64]) -> Layout:
    """The layout of the mixtures ``rows`` only (a bench with missing readings)."""
    position = {int(r): i for i, r in enumerate(rows)}

    def keep(indices: NDArray[np.int64]) -> NDArray[np.int64]:
        return np.array([position[int(i)] for i in indices if int(i) in position], dtype=np.int64)

    return Layout(
        totals_M=layout.totals_M[rows],
        blanks=keep(layout.blanks),
        standards=keep(layout.standards),
        tests=keep(layout.tests),
        limiting=layout.limiting,
        excess=layout.excess,
        measured=layout.measured,
        epsilon_true=layout.epsilon_true,
        K_true=layout.K_true,
    )


@record
class _Fits:
    """Both analyses of a group of benches with the same mixtures read (one row per bench)."""

    epsilon_all_bound: NDArray[np.float64]
    K_tests: NDArray[np.float64]  # (n, n_tests of the sub-layout)
    epsilon_global_fit: NDArray[np.float64]
    K_global_fit: NDArray[np.float64]
    residuals: NDArray[np.float64]  # (n, n_fitted of the sub-layout)
    line_residuals: NDArray[np.float64]  # (n, n_standards of the sub-layout)
    line_u: NDArray[np.float64]  # (n_standards,): u of each line residual


def _analyse_group(
    section: _Section, rows: NDArray[np.int64], readings: NDArray[np.float64]
) -> _Fits:
    inputs = section.saved.inputs
    instrument = inputs.instrument
    b = instrument.path_length_cm
    layout = _sub_layout(section.layout, rows)
    n = readings.shape[0]
    net = readings - readings[:, layout.blanks].mean(axis=1, keepdims=True)
    eps, k_tests = all_bound_mean_K(layout, net, b)
    with np.errstate(invalid="ignore"):
        k_mean = k_tests.mean(axis=1)
    fitted = layout.standards.size + layout.tests.size
    if fitted >= 2:
        table: GlobalFitTable = global_fit_table(inputs.reaction, instrument, layout)
        offset = global_fit_start_offset(table, section.predicted[rows])
        starts = global_fit_starts(table, eps, k_mean, offset)
        eps_gf, k_gf = global_fit_batch(table, net, starts)
        residuals = global_fit_residuals(table, net, eps_gf, k_gf)
    else:
        eps_gf = k_gf = np.full(n, np.nan)
        residuals = np.full((n, fitted), np.nan)
    # Each standard against the line through the others (the all-bound standard curve).
    std = layout.standards
    limiting = layout.totals_M[std, layout.limiting]
    u_a = section.u_absorbance[rows]
    line = np.full((n, std.size), np.nan)
    line_u = np.full(std.size, np.nan)
    for j in range(std.size if std.size >= 2 else 0):
        others = np.delete(np.arange(std.size), j)
        slope = all_bound_epsilon(
            np.broadcast_to(limiting[others], (n, others.size)), net[:, std[others]], b
        )
        line[:, j] = net[:, std[j]] - slope * b * limiting[j]
        # The residual is linear in the readings: r = A_j - L_j sum(L_i A_i)/sum(L_i^2) -
        # (1 - L_j sum(L_i)/sum(L_i^2)) mean(A_blank); with independent readings of the
        # plan's u(A), u(r)^2 is the sum of squared coefficients times u(A)^2 (JCGM 100:2008,
        # eq. 10).
        l_others = limiting[others]
        s2 = float(l_others @ l_others)
        blank_coefficient = (1.0 - limiting[j] * l_others.sum() / s2) / layout.blanks.size
        line_u[j] = math.sqrt(
            u_a[std[j]] ** 2
            + float(((limiting[j] * l_others / s2) ** 2 * u_a[std[others]] ** 2).sum())
            + float((blank_coefficient**2 * u_a[layout.blanks] ** 2).sum())
        )
    return _Fits(eps, k_tests, eps_gf, k_gf, residuals, line, line_u)


def _residuals_without(
    section: _Section, rows: NDArray[np.int64], full: NDArray[np.float64], dropped: frozenset[str]
) -> dict[str, float] | None:
    """Each fitted mixture's residual against the bench's global fit made without the mixtures
    ``dropped`` (their residuals included: reading minus what that fit predicts for them), by
    id; None when the refit does not converge or too little is left to fit."""
    ids = section.ids
    kept = np.array([r for r in rows if ids[int(r)] not in dropped], dtype=np.int64)
    refit = _fits(section, kept, _sub_layout(section.layout, kept), full[kept][None, :])
    if refit is None:
        return None
    eps, k = refit.epsilon_global_fit, refit.K_global_fit
    if not (math.isfinite(float(eps[0])) and math.isfinite(float(k[0]))):
        return None
    layout = _sub_layout(section.layout, rows)
    readings = full[rows][None, :]
    net = readings - readings[:, layout.blanks].mean(axis=1, keepdims=True)
    table = global_fit_table(section.saved.inputs.reaction, section.saved.inputs.instrument, layout)
    residuals = global_fit_residuals(table, net, eps, k)[0]
    fitted = rows[np.concatenate([layout.standards, layout.tests])]
    return {ids[int(r)]: float(v) for r, v in zip(fitted, residuals, strict=True)}


def _line_residuals_without(
    section: _Section, rows: NDArray[np.int64], full: NDArray[np.float64], dropped: frozenset[str]
) -> dict[str, float] | None:
    """Each standard's residual against the all-bound standard curve (through the origin) of
    the standards not ``dropped``: a kept standard against the line through the other kept
    ones, as :func:`_analyse_group` does with all of them, a dropped one against the line
    through every kept one; by id. None with fewer than two standards kept or no blank."""
    ids = section.ids
    layout = _sub_layout(section.layout, rows)
    if layout.blanks.size == 0:
        return None
    b = section.saved.inputs.instrument.path_length_cm
    net = full[rows] - full[rows[layout.blanks]].mean()
    std = layout.standards
    limiting = layout.totals_M[std, layout.limiting]
    names = [ids[int(rows[j])] for j in std]
    kept = [k for k, name in enumerate(names) if name not in dropped]
    if len(kept) < 2:
        return None
    result = {}
    for k, name in enumerate(names):
        through = [i for i in kept if i != k]
        slope = float(
            all_bound_epsilon(limiting[through][None, :], net[std[through]][None, :], b)[0]
        )
        result[name] = float(net[std[k]] - slope * b * limiting[k])
    return result


# ---------------------------------------------------------------------------------------------
# Flags
# ---------------------------------------------------------------------------------------------


def _g(value: float) -> str:
    return f"{value:.4g}"


def _flags(
    section: _Section,
    mixtures: Sequence[MixtureResult],
    missing: Sequence[str],
    scale: float,
    gf_failed: bool,
    refit: Callable[[frozenset[str]], Mapping[str, float] | None] | None = None,
) -> tuple[Flag, ...]:
    """The bench's flags. ``refit`` gives every fitted mixture's residual against the bench's
    global fit made without the mixtures named (:func:`_residuals_without`)."""
    inputs = section.saved.inputs
    flags: list[Flag] = []
    if missing:
        flags.append(
            Flag(
                "missing-mixture",
                tuple(missing),
                "not measured, or its row was rejected (see the rejected rows)",
                f"no reading of {', '.join(missing)}",
                "any mixture of the plan without a reading",
            )
        )
    low, high = inputs.instrument.absorbance_window
    outside = [
        m
        for m in mixtures
        if m.role != "blank" and math.isfinite(m.reading) and not low <= m.reading <= high
    ]
    if outside:
        flags.append(
            Flag(
                "reading-outside-window",
                tuple(m.id for m in outside),
                "outside the photometer's linear range: a wrong volume or stock, a dirty or "
                "wrong cuvette, or the photometer not zeroed",
                "; ".join(f"{m.id} read {_g(m.reading)}" for m in outside),
                f"the plan's absorbance window {_g(low)}-{_g(high)} (instrument.absorbance_window)",
            )
        )
    all_bound_line = section.saved.analysis == "all-bound"
    standards = [m for m in mixtures if m.role == "standard"]
    k_std = _family_factor(len(standards))
    off = []
    for m in standards:
        r = m.line_residual if all_bound_line else m.residual
        if math.isfinite(r) and abs(r) > k_std * m.u_residual:
            off.append((m, r))
    dropped: list[MixtureResult] = []
    if refit is not None:
        off, dropped = _unmask(off, standards, k_std, refit)
    if off:

        def line_words(standard: MixtureResult) -> str:
            if all_bound_line:  # "the other standards" leaves the standard itself out
                others = [m.id for m in dropped if m is not standard]
                return "the line through the other standards" + (
                    f" without {', '.join(others)}" if others else ""
                )
            without = f" without {', '.join(m.id for m in dropped)}" if dropped else ""
            return f"the bench's global fit{without}"

        flags.append(
            Flag(
                "standard-off-line",
                tuple(m.id for m, _ in off),
                "a standard made wrong: a pipetting slip, a wrong stock or a mislabelled tube",
                "; ".join(
                    f"{m.id} is {_g(r)} off {line_words(m)} ({_g(abs(r) / m.u_residual)} u, "
                    f"u = {_g(m.u_residual)})"
                    for m, r in off
                ),
                f"more than {_g(k_std)} u off, u propagated from the plan's u(A) ("
                f"{OFF_LINE_U:g} sigma for the bench's {len(standards)} standards together, "
                "Bonferroni; common practice)",
            )
        )
    eps_pred = (
        section.epsilon_all_bound
        if math.isfinite(section.epsilon_all_bound[0])
        else section.epsilon_global_fit
    )
    if math.isfinite(scale) and math.isfinite(eps_pred[0]) and not off:
        u_rel = _u_of((eps_pred[1], eps_pred[2])) / eps_pred[0]
        # Both the least-squares factor and the median ratio must be off: one wild reading
        # moves the first only.
        median = _median_ratio(mixtures)
        if abs(scale - 1.0) > COVERAGE_FLAG * u_rel and abs(median - 1.0) > COVERAGE_FLAG * u_rel:
            ratios = [
                m.reading / m.expected.predicted
                for m in mixtures
                if m.role != "blank" and math.isfinite(m.reading) and m.expected.predicted > 0
            ]
            flags.append(
                Flag(
                    "readings-scaled",
                    (),
                    "every reading scaled by one factor: a cuvette of another path length, a "
                    "scratched or dirty cuvette, or another wavelength",
                    f"readings are {_g(scale)} x the predicted ones (each reading / its "
                    f"prediction: {_g(min(ratios))} to {_g(max(ratios))}); u(eps)/eps = "
                    f"{_g(u_rel)}",
                    f"|factor - 1| more than {COVERAGE_FLAG:g} u(eps)/eps (common practice), "
                    "u(eps) from plan.json",
                )
            )
    tests = [m for m in mixtures if m.role == "test" and math.isfinite(m.K.low)]
    k_test = _family_factor(len(tests))
    # NaN: not computed (bench not analysed); inf or a negative K: a reading the 1:1
    # expression cannot give, which is outside any range.
    wrong = [
        m
        for m in tests
        if not math.isnan(m.K.value)
        and (
            not math.isfinite(m.K.value)
            or abs(m.K.value - m.K.predicted) > k_test * _u_of((m.K.low, m.K.high))
        )
    ]
    if wrong:
        flags.append(
            Flag(
                "test-K-outside-range",
                tuple(m.id for m in wrong),
                "a test made or read wrong: a mislabelled or swapped tube, a pipetting slip, "
                "or a reading of another mixture",
                "; ".join(
                    (
                        f"{m.id} gives K = {_g(m.K.value)}"
                        if math.isfinite(m.K.value) and m.K.value > 0
                        else f"{m.id} gives no K (its net reading is below the blank's, or "
                        "implies as much product as one of its reagents holds, or more)"
                    )
                    + f", predicted {_g(m.K.predicted)} "
                    f"(95 % range {_g(m.K.low)}-{_g(m.K.high)})"
                    for m in wrong
                ),
                f"more than {_g(k_test)} u(K) of the test from its predicted K ("
                f"{COVERAGE_FLAG:g} sigma for the bench's {len(tests)} tests together, "
                "Bonferroni; common practice), u(K) from the plan's first-order budget",
            )
        )
    trend = _trend(tests)
    if trend is not None and abs(trend[1]) > TREND_T:
        flags.append(
            Flag(
                "K-trend-with-bound-fraction",
                tuple(m.id for m in tests),
                "K changes with the bound fraction: the all-bound assumption failing (standards "
                "not fully bound, or another complex forming), or a wrong standard curve",
                f"K minus its predicted value changes by {_g(trend[0])} per unit of bound "
                f"fraction, {_g(abs(trend[1]))} standard errors from zero",
                f"|slope| more than {TREND_T:g} standard errors (common practice), weights from "
                "the predicted u(K) of each test",
            )
        )
    if gf_failed:
        flags.append(
            Flag(
                "global-fit-failed",
                (),
                "the readings do not follow the equilibrium model at any K near the plan's",
                "the global fit did not converge within 1.5 decades of the plan's K",
                "convergence of the global fit (planner.analysis)",
            )
        )
    return tuple(flags)


def _unmask(
    off: list[tuple[MixtureResult, float]],
    standards: Sequence[MixtureResult],
    k_std: float,
    refit: Callable[[frozenset[str]], Mapping[str, float] | None],
) -> tuple[list[tuple[MixtureResult, float]], list[MixtureResult]]:
    """The standards off the bench's global fit (or standard curve) once the worst ones are
    left out of it.

    One wrong standard pulls the global fit, or the line through the standards, towards
    itself, so the right ones then sit off it too and its own residual shrinks. While a
    standard is off, the one furthest off (in its u) is left out and the bench refitted; a
    standard is flagged when it stays off the fit without the worst ones, and each standard
    left out is flagged with its residual against that fit
    (the masking of outliers in least squares: Rousseeuw and Leroy, Robust Regression and
    Outlier Detection, 1987, ch. 6, from memory). Returns the flagged standards with their
    residuals, and those left out.
    """
    dropped: list[MixtureResult] = []
    latest: Mapping[str, float] | None = None
    while off and len(dropped) < len(standards) - 2:
        worst = max(off, key=lambda pair: abs(pair[1]) / pair[0].u_residual)[0]
        residuals = refit(frozenset(m.id for m in [*dropped, worst]))
        if residuals is None:
            break
        dropped.append(worst)
        latest = residuals
        off = [
            (m, residuals[m.id])
            for m in standards
            if m not in dropped
            and math.isfinite(residuals[m.id])
            and abs(residuals[m.id]) > k_std * m.u_residual
        ]
    if latest is None:
        return off, []
    return [(m, latest[m.id]) for m in dropped] + off, dropped


@record
class _Net:
    """A bench's standard and test readings read, blank subtracted, beside their predictions.

    ``observed`` and ``predicted`` are reading minus the mean blank reading and prediction
    minus the mean predicted blank; ``u`` is the u of a net reading,
    sqrt(u(A)^2 + u(A_blank)^2), u(A_blank) that of the blanks' mean."""

    read: list[MixtureResult]
    observed: NDArray[np.float64]
    predicted: NDArray[np.float64]
    u: NDArray[np.float64]


def _net(mixtures: Sequence[MixtureResult]) -> _Net | None:
    """The bench's net readings (:class:`_Net`); None without a blank read."""
    blanks = [m for m in mixtures if m.role == "blank" and math.isfinite(m.reading)]
    if not blanks:
        return None
    read = [m for m in mixtures if m.role != "blank" and math.isfinite(m.reading)]
    blank = sum(m.reading for m in blanks) / len(blanks)
    blank_predicted = sum(m.expected.predicted for m in blanks) / len(blanks)
    u_blank2 = sum(m.u_absorbance**2 for m in blanks) / len(blanks) ** 2
    return _Net(
        read,
        np.array([m.reading - blank for m in read]),
        np.array([m.expected.predicted - blank_predicted for m in read]),
        np.sqrt(np.array([m.u_absorbance**2 for m in read]) + u_blank2),
    )


def _median_ratio(mixtures: Sequence[MixtureResult]) -> float:
    """Median of the blank-subtracted readings over their predictions (standards and tests).

    A cuvette of another path length scales every reading alike, so the median moves with
    the least-squares factor; one wild reading pulls that factor but not the median, and is
    not a scale (the rules on readings and tests name it). NaN without a blank or a reading.
    """
    net = _net(mixtures)
    if net is None:
        return _NAN
    positive = net.predicted > 0
    if not np.any(positive):
        return _NAN
    return float(np.median(net.observed[positive] / net.predicted[positive]))


def _family_factor(count: int) -> float:
    """Coverage factor that keeps the chance of a false flag among ``count`` values of one
    bench at that of one value beyond 3 sigma (two-sided 0.27 %), by the Bonferroni
    correction (e.g. Miller, Simultaneous Statistical Inference, 2nd ed., 1981, from
    memory): 3 for one value, about 3.46 for five."""
    from statistics import NormalDist

    tail = NormalDist().cdf(-COVERAGE_FLAG)  # one side, 0.135 %
    return -NormalDist().inv_cdf(tail / max(count, 1))


def _trend(tests: Sequence[MixtureResult]) -> tuple[float, float] | None:
    """Weighted least-squares slope of (K - predicted K) against bound fraction and slope /
    its standard error, with the predicted u(K) of each test as known standard deviations
    (Draper and Smith, 3rd ed., section 9.2, from memory); None with fewer than three usable
    tests. The predicted K of each test already carries the trend the all-bound assumption
    gives on this plan, so only a trend beyond the prediction counts."""
    usable = [m for m in tests if math.isfinite(m.K.value) and _u_of((m.K.low, m.K.high)) > 0]
    if len(usable) < 3:
        return None
    f = np.array([m.bound_fraction for m in usable])
    k = np.array([m.K.value - m.K.predicted for m in usable])
    w = 1.0 / np.array([_u_of((m.K.low, m.K.high)) for m in usable]) ** 2
    f_mean = float((w * f).sum() / w.sum())
    spread = float((w * (f - f_mean) ** 2).sum())
    if spread <= 0:
        return None
    slope = float((w * (f - f_mean) * k).sum() / spread)
    return slope, slope * math.sqrt(spread)


# ---------------------------------------------------------------------------------------------
# The class
# ---------------------------------------------------------------------------------------------


def _statistic(
    values: Sequence[float], predicted: Sequence[tuple[float, float, float]]
) -> ClassStatistic:
    data = np.array([v for v in values if math.isfinite(v)])
    n = int(data.size)
    mean = float(data.mean()) if n else _NAN
    sd = float(data.std(ddof=1)) if n >= 2 else _NAN
    usable = [p for p in predicted if math.isfinite(p[0])]
    return ClassStatistic(
        n=n,
        mean=mean,
        sd=sd,
        low=mean - COVERAGE_FACTOR_95 * sd,
        high=mean + COVERAGE_FACTOR_95 * sd,
        predicted=float(np.mean([p[0] for p in usable])) if usable else _NAN,
        predicted_low=min((p[1] for p in usable), default=_NAN),
        predicted_high=max((p[2] for p in usable), default=_NAN),
    )


def _pooled(
    sections: Mapping[int, _Section],
    benches: Sequence[BenchResult],
) -> Pooled | None:
    ok = [b for b in benches if not b.flags]
    includes_flagged = not ok
    if not ok:
        ok = [b for b in benches if math.isfinite(b.K_all_bound.value)]
    if not ok:
        return None
    numbers = sorted({b.section for b in ok})
    first = sections[numbers[0]].saved.inputs
    for number in numbers[1:]:
        other = sections[number].saved.inputs
        if other.reaction != first.reaction or other.instrument != first.instrument:
            raise InvalidInputError(
                "sections of different reactions or photometers cannot be pooled",
                field="--plan",
                value=number,
                hint="analyse the readings of one plan, or of one variants folder, at a time",
            )
    index = {number: i for i, number in enumerate(numbers)}
    layouts = [sections[number].layout for number in numbers]
    sets = [(index[b.section], np.array([m.reading for m in b.mixtures])) for b in ok]
    fit = global_fit_sets(first.reaction, first.instrument, layouts, sets)
    # Lack of fit: the benches of a section are replicates of its mixtures.
    groups: dict[tuple[int, int], list[float]] = {}
    for bench, residuals in zip(ok, fit.residuals, strict=True):
        for position, value in enumerate(residuals):
            if math.isfinite(value):
                groups.setdefault((bench.section, position), []).append(float(value))
    pure = sum(float(((np.array(v) - np.mean(v)) ** 2).sum()) for v in groups.values())
    n, m = fit.n_readings, len(groups)
    df_pure, df_lack = n - m, m - 2
    f_value = p_value = _NAN
    if df_pure > 0 and df_lack > 0 and pure > 0:
        from scipy.stats import f as f_distribution

        f_value = ((fit.sum_of_squares - pure) / df_lack) / (pure / df_pure)
        p_value = float(f_distribution.sf(f_value, df_lack, df_pure))
    return Pooled(
        epsilon=fit.epsilon,
        u_epsilon=fit.u_epsilon,
        K=fit.K,
        u_K=fit.u_K,
        n_readings=n,
        n_benches=len(ok),
        includes_flagged=includes_flagged,
        rms_residual=math.sqrt(fit.sum_of_squares / n) if n else _NAN,
        lack_of_fit_F=float(f_value),
        lack_of_fit_p=p_value,
        df_lack_of_fit=max(df_lack, 0) if math.isfinite(f_value) else 0,
        df_pure_error=max(df_pure, 0) if math.isfinite(f_value) else 0,
    )


def _fits(
    section: _Section, rows: NDArray[np.int64], sub: Layout, readings: NDArray[np.float64]
) -> _Fits | None:
    """Both analyses of benches that read the mixtures at ``rows`` (``sub`` their layout), or
    None when those mixtures lack a blank, a standard or a test."""
    usable = sub.blanks.size > 0 and sub.standards.size > 0 and sub.tests.size > 0
    return _analyse_group(section, rows, readings) if usable else None


def _bench_results(
    number: int,
    section: _Section,
    keys: Sequence[BenchKey],
    found: Mapping[BenchKey, dict[str, Reading]],
) -> list[BenchResult]:
    ids = section.ids
    index = {mixture_id: i for i, mixture_id in enumerate(ids)}
    layout = section.layout
    groups: dict[tuple[int, ...], list[BenchKey]] = {}
    for key in keys:
        present = tuple(sorted(index[m] for m in found[key]))
        groups.setdefault(present, []).append(key)
    results: list[BenchResult] = []
    for present, members in groups.items():
        rows = np.array(present, dtype=np.int64)
        readings = np.array(
            [[found[key][ids[r]].absorbance for r in present] for key in members], dtype=float
        )
        sub = _sub_layout(layout, rows)
        fits = _fits(section, rows, sub, readings)
        for i, key in enumerate(members):
            result = _bench(number, section, key, found[key], rows, sub, fits, i)
            results.append(_explained(number, section, key, found[key], rows, sub, result))
    return results


# ---------------------------------------------------------------------------------------------
# Slips that explain a whole bench
# ---------------------------------------------------------------------------------------------


def _explained(
    number: int,
    section: _Section,
    key: BenchKey,
    readings: Mapping[str, Reading],
    rows: NDArray[np.int64],
    sub: Layout,
    result: BenchResult,
) -> BenchResult:
    """A flagged bench whose readings one common slip explains: two mixtures read as each
    other (:func:`_swaps`) or one offset on every blank-subtracted reading (:func:`_offset`).

    The slip's flag comes first, and the bench's other flags are those of its readings with
    the slip undone, so the knock-on flags of the slip (standards off the line, tests'
    K out of range, a trend) are not reported as faults of their own. The bench's values
    stay those of its readings as given.
    """
    if not result.flags or sub.blanks.size == 0 or sub.standards.size == 0:
        return result
    found = _swaps(result.mixtures) or _offset(result.mixtures)
    if found is not None:
        flag, corrected = found
        undone = {
            mixture_id: dataclasses.replace(r, absorbance=corrected.get(mixture_id, r.absorbance))
            for mixture_id, r in readings.items()
        }
        fixed = _reanalysed(number, section, key, undone, rows)
        return dataclasses.replace(result, flags=(flag, *fixed.flags))
    return _without_wrong_standards(number, section, key, readings, rows, result)


def _reanalysed(
    number: int,
    section: _Section,
    key: BenchKey,
    readings: Mapping[str, Reading],
    rows: NDArray[np.int64],
) -> BenchResult:
    """One bench analysed alone from ``readings`` of the mixtures at ``rows``."""
    sub = _sub_layout(section.layout, rows)
    values = np.array([[readings[section.ids[int(r)]].absorbance for r in rows]], dtype=float)
    return _bench(number, section, key, readings, rows, sub, _fits(section, rows, sub, values), 0)


def _without_wrong_standards(
    number: int,
    section: _Section,
    key: BenchKey,
    readings: Mapping[str, Reading],
    rows: NDArray[np.int64],
    result: BenchResult,
) -> BenchResult:
    """A bench with a standard off the line keeps that flag and what is said of its readings
    themselves (missing, outside the window); its other flags become those of its readings
    without the wrong standards: a wrong standard tilts the standard curve, so every test's
    K moves with it, and the tests were not made wrong. Nothing changes when fewer than two
    standards would be left."""
    off = next((f for f in result.flags if f.rule == "standard-off-line"), None)
    if off is None:
        return result
    kept = {mixture_id: r for mixture_id, r in readings.items() if mixture_id not in off.mixtures}
    kept_rows = np.array([r for r in rows if section.ids[int(r)] in kept], dtype=np.int64)
    sub = _sub_layout(section.layout, kept_rows)
    if sub.standards.size < 2 or sub.blanks.size == 0 or sub.tests.size == 0:
        return result
    fixed = _reanalysed(number, section, key, kept, kept_rows)
    # What is said of the readings themselves stays as found; the rest is judged again.
    own = ("missing-mixture", "reading-outside-window", off.rule)
    return dataclasses.replace(
        result,
        flags=(
            *(f for f in result.flags if f.rule in own),
            *(f for f in fixed.flags if f.rule not in own),
        ),
    )


def _swaps(mixtures: Sequence[MixtureResult]) -> tuple[Flag, dict[str, float]] | None:
    """Pairs of mixtures each read as the other: each reading is off its own prediction by
    more than the bench's family factor times u(A), and within it of the other's. Pairs are
    taken in plan order, each mixture in one pair at most."""
    read = [m for m in mixtures if math.isfinite(m.reading) and m.u_absorbance > 0]
    k = _family_factor(len(read))

    def fits(m: MixtureResult, value: float) -> bool:
        return abs(value - m.expected.predicted) <= k * m.u_absorbance

    pairs: list[tuple[MixtureResult, MixtureResult]] = []
    taken: set[str] = set()
    for a, b in itertools.combinations(read, 2):
        if a.id in taken or b.id in taken:
            continue
        each_off = not fits(a, a.reading) and not fits(b, b.reading)
        if each_off and fits(a, b.reading) and fits(b, a.reading):
            pairs.append((a, b))
            taken |= {a.id, b.id}
    if not pairs:
        return None
    corrected = {}
    for a, b in pairs:
        corrected[a.id], corrected[b.id] = b.reading, a.reading
    flag = Flag(
        "mixtures-swapped",
        tuple(m.id for pair in pairs for m in pair),
        "two tubes or cuvettes exchanged: labels swapped, or read in the wrong order",
        "; ".join(
            f"{a.id} read {_g(a.reading)} and {b.id} read {_g(b.reading)}, each the other's "
            f"prediction ({a.id} {_g(a.expected.predicted)}, {b.id} {_g(b.expected.predicted)})"
            for a, b in pairs
        ),
        f"each reading more than {_g(k)} u(A) from its own prediction and within {_g(k)} u(A) "
        f"of the other's ({COVERAGE_FLAG:g} sigma for the bench's {len(read)} readings "
        "together, Bonferroni; common practice); the other flags are those left with the "
        "two readings exchanged back",
    )
    return flag, corrected


def _offset(mixtures: Sequence[MixtureResult]) -> tuple[Flag, dict[str, float]] | None:
    """One offset on every blank-subtracted standard and test reading: the blank read off
    against the other cuvettes.

    Each net residual r = (A - A_blank) - (predicted - predicted blank) has
    u = sqrt(u(A)^2 + u(A_blank)^2); the offset c is their weighted mean. It explains the
    bench when every residual lies within the family factor times its u of c, c itself is
    that far from zero, and one factor on the predicted readings (``readings-scaled``) fits
    them less closely (a larger sum of squared residuals in their u)."""
    found = _net(mixtures)
    if found is None or len(found.read) < 3 or not np.all(found.u > 0):
        return None
    read, net, u = found.read, found.predicted, found.u
    r = found.observed - net
    w = 1.0 / u**2
    c = float((w * r).sum() / w.sum())
    k = _family_factor(len(read))
    explains = bool(np.all(np.abs(r - c) <= k * u))
    factor = float((net @ (net + r)) / (net @ net)) if float(net @ net) > 0 else 1.0
    # Both may pass on a few readings close together; the one nearer the readings wins.
    scaled = float((((r - (factor - 1.0) * net) / u) ** 2).sum()) < float(
        (((r - c) / u) ** 2).sum()
    )
    if not explains or scaled or abs(c) <= k * float(u.min()):
        return None
    direction = (
        "the blank read low against the other cuvettes: a blank cuvette not matched to "
        "the others, or the photometer zeroed on another cell"
        if c > 0
        else "the blank read high: a blank that absorbs (made wrong or contaminated), or a "
        "smudged blank cuvette"
    )
    flag = Flag(
        "blank-offset",
        tuple(m.id for m in mixtures if m.role == "blank" and math.isfinite(m.reading)),
        direction,
        f"every standard and test reads {_g(c)} {'above' if c > 0 else 'below'} its "
        f"prediction once the blank is subtracted ({_g(float(r.min()))} to "
        f"{_g(float(r.max()))})",
        f"each blank-subtracted reading within {_g(k)} u of one offset that is itself more "
        f"than {_g(k)} u from zero ({COVERAGE_FLAG:g} sigma for the bench's {len(read)} "
        "readings together, Bonferroni; common practice); the other flags are those left "
        "with the offset taken off",
    )
    return flag, {m.id: m.reading - c for m in read}


def _mean_of_positive(values: NDArray[np.float64]) -> float:
    """Mean of the finite positive values; NaN when there is none."""
    kept = values[np.isfinite(values) & (values > 0)]
    return float(kept.mean()) if kept.size else _NAN


def _bench(
    number: int,
    section: _Section,
    key: BenchKey,
    readings: Mapping[str, Reading],
    rows: NDArray[np.int64],
    sub: Layout,
    fits: _Fits | None,
    i: int,
) -> BenchResult:
    n_mix = len(section.ids)
    full = np.full(n_mix, np.nan)
    for r in rows:
        full[r] = readings[section.ids[r]].absorbance
    residual = np.full(n_mix, np.nan)
    line = np.full(n_mix, np.nan)
    line_u = np.full(n_mix, np.nan)
    k_test = np.full(n_mix, np.nan)
    eps_ab = k_ab = eps_gf = k_gf = _NAN
    if fits is not None:
        fitted_rows = rows[np.concatenate([sub.standards, sub.tests])]
        residual[fitted_rows] = fits.residuals[i]
        line[rows[sub.standards]] = fits.line_residuals[i]
        if section.saved.analysis == "all-bound":
            line_u[rows[sub.standards]] = fits.line_u
        else:
            blank_u2 = float((section.u_absorbance[rows[sub.blanks]] ** 2).mean()) / sub.blanks.size
            line_u[rows[sub.standards]] = np.sqrt(
                section.u_absorbance[rows[sub.standards]] ** 2 + blank_u2
            )
        k_test[rows[sub.tests]] = fits.K_tests[i]
        eps_ab = float(fits.epsilon_all_bound[i])
        # A test whose reading gives no K (the 1:1 expression negative or infinite) is left
        # out of the bench's mean, as the bench itself would leave it; it is flagged.
        k_ab = _mean_of_positive(fits.K_tests[i])
        eps_gf = float(fits.epsilon_global_fit[i])
        k_gf = float(fits.K_global_fit[i])
    test_rows = [int(t) for t in section.layout.tests]
    mixtures = []
    for j, mixture_id in enumerate(section.ids):
        k_range = (_NAN, *_NO_RANGE)
        if j in test_rows and test_rows.index(j) < len(section.K_tests):
            k_range = section.K_tests[test_rows.index(j)]
        mixtures.append(
            MixtureResult(
                id=mixture_id,
                role=section.roles[j],
                reading=float(full[j]),
                expected=Estimate(
                    float(full[j]),
                    float(section.predicted[j]),
                    *_range(float(section.predicted[j]), float(section.u_absorbance[j])),
                ),
                u_absorbance=float(section.u_absorbance[j]),
                residual=float(residual[j]),
                line_residual=float(line[j]),
                u_residual=float(line_u[j]),
                K=_estimate(float(k_test[j]), k_range),
                bound_fraction=float(section.bound_fraction[j]),
            )
        )
    scale = _scale(section, full)
    missing = [m for m in section.ids if m not in readings]
    refit = None
    if fits is not None and section.saved.analysis == "global-fit":

        def refit(dropped: frozenset[str]) -> Mapping[str, float] | None:
            return _residuals_without(section, rows, full, dropped)

    elif fits is not None:

        def refit(dropped: frozenset[str]) -> Mapping[str, float] | None:
            return _line_residuals_without(section, rows, full, dropped)

    gf_failed = fits is not None and not math.isfinite(k_gf)
    flags = _flags(section, mixtures, missing, scale, gf_failed, refit)
    if fits is None:
        flags = (
            *flags,
            Flag(
                "not-analysed",
                (),
                "too few mixtures read to analyse: a blank, a standard and a test are needed",
                f"read: {', '.join(section.ids[r] for r in rows)}",
                "the analyses' minimum (planner.analysis)",
            ),
        )
    return BenchResult(
        section=number,
        bench=key[1],
        replicate=key[2],
        epsilon_all_bound=_estimate(eps_ab, section.epsilon_all_bound),
        K_all_bound=_estimate(k_ab, section.K_all_bound),
        epsilon_global_fit=_estimate(eps_gf, section.epsilon_global_fit),
        K_global_fit=_estimate(k_gf, section.K_global_fit),
        mixtures=tuple(mixtures),
        scale=scale,
        flags=flags,
        rows=tuple(sorted(r.row for r in readings.values())),
    )


def _scale(section: _Section, full: NDArray[np.float64]) -> float:
    """Least-squares factor (through the origin) of the bench's blank-subtracted readings on
    the predicted ones, over the standards and tests read."""
    blanks = [int(b) for b in section.layout.blanks if math.isfinite(full[b])]
    if not blanks:
        return _NAN
    fitted = [int(r) for r in (*section.layout.standards, *section.layout.tests)]
    fitted = [r for r in fitted if math.isfinite(full[r])]
    if not fitted:
        return _NAN
    observed = full[fitted] - full[blanks].mean()
    predicted = section.predicted[fitted] - section.predicted[blanks].mean()
    denominator = float(predicted @ predicted)
    return float(predicted @ observed) / denominator if denominator > 0 else _NAN


#: Sets with no row in the file listed per section; beyond it they are counted.
ABSENT_LISTED = 30


def _sets_not_analysed(
    plans: Mapping[int, SavedPlan], table: ReadingsTable, found: set[BenchKey]
) -> tuple[tuple[BenchKey, ...], tuple[BenchKey, ...], int, tuple[int, ...]]:
    """The sets of mixtures the analysis has no reading of, other than the unmeasured ones.

    Returns (lost, absent, n_absent, sections without rows) as in :class:`ClassAnalysis`:
    no set of the plan goes unmentioned, whether its rows were all rejected or never given.
    """
    given = found | {(s, b, r) for _, s, b, r, _ in table.empty}
    rejected = {r.bench_set for r in table.rejections if r.bench_set is not None}
    lost = tuple(sorted(rejected - given))
    in_file = given | rejected
    sections_in_file = {key[0] for key in in_file}
    absent: list[BenchKey] = []
    n_absent = 0
    for number, saved in sorted(plans.items()):
        if number not in sections_in_file:
            continue
        session = saved.inputs.session
        # Every key in the file is one of the plan's sets (rows naming others are rejected
        # without a set), so counting needs no walk over the plan's sets (up to 1e5 of them
        # per section); the listing walks them only until it has its share.
        here = sum(1 for key in in_file if key[0] == number)
        n_absent += session.benches_per_section * session.replicates - here
        walk = (
            (number, bench, replicate)
            for bench in range(1, session.benches_per_section + 1)
            for replicate in range(1, session.replicates + 1)
        )
        absent.extend(itertools.islice((k for k in walk if k not in in_file), ABSENT_LISTED))
    silent = tuple(number for number in sorted(plans) if number not in sections_in_file)
    return lost, tuple(absent), n_absent, silent


def analyse_class(plans: Mapping[int, SavedPlan], table: ReadingsTable) -> ClassAnalysis:
    """Analyse a class's readings, each bench against its own section's plan.

    Parameters
    ----------
    plans
        Section number -> the saved plan that section made (the same plan for every section
        of a plan folder; one per section of a variants folder).
    table
        The readings, read by :func:`planner.readings.parse_readings` against these sections.

    Returns
    -------
    ClassAnalysis
        Every bench with its values, ranges, residuals and flags; the class's statistics over
        the benches that are ok, and their pooled global fit.

    Raises
    ------
    InvalidInputError
        A plan without a blank, a standard and a test (it cannot be analysed), or ok benches
        of sections with different reactions or photometers (they cannot be pooled).
    """
    built: dict[int, _Section] = {}
    cache: dict[int, _Section] = {}
    for number, saved in sorted(plans.items()):
        if id(saved) not in cache:
            cache[id(saved)] = _section(saved)
        built[number] = cache[id(saved)]
    found: dict[BenchKey, dict[str, Reading]] = {}
    for reading in table.readings:
        key = (reading.section, reading.bench, reading.replicate)
        found.setdefault(key, {})[reading.mixture] = reading
    benches: list[BenchResult] = []
    for number, section in built.items():
        keys = sorted(key for key in found if key[0] == number)
        benches.extend(_bench_results(number, section, keys, found))
    benches.sort(key=lambda b: (b.section, b.bench, b.replicate))
    unmeasured = sorted(
        {(s, b, r) for _, s, b, r, _ in table.empty} - set(found),
    )
    lost, absent, n_absent, silent = _sets_not_analysed(plans, table, set(found))
    ok = [b for b in benches if not b.flags]
    sections_used = sorted({b.section for b in benches}) or sorted(built)
    predicted = [built[number] for number in sections_used]
    first = next(iter(built.values()))
    return ClassAnalysis(
        benches=tuple(benches),
        rejections=table.rejections,
        unmeasured=tuple(unmeasured),
        lost=lost,
        absent=absent,
        n_absent=n_absent,
        sections_without_rows=silent,
        K_all_bound=_statistic(
            [b.K_all_bound.value for b in ok], [s.K_all_bound for s in predicted]
        ),
        K_global_fit=_statistic(
            [b.K_global_fit.value for b in ok], [s.K_global_fit for s in predicted]
        ),
        epsilon_all_bound=_statistic(
            [b.epsilon_all_bound.value for b in ok], [s.epsilon_all_bound for s in predicted]
        ),
        epsilon_global_fit=_statistic(
            [b.epsilon_global_fit.value for b in ok], [s.epsilon_global_fit for s in predicted]
        ),
        pooled=_pooled(built, benches),
        K_true=first.layout.K_true,
        sections=tuple(sections_used),
        K_unit=first.saved.inputs.measured_species.K_unit,
    )
