"""The virtual class and its uncertainty budget, for people (rich) and programs (JSON).

:func:`simulation_document` is the ``planner simulate --format json`` document, schema
``planner.simulate/2``: ``epsilon`` and ``K``, each ``{analysis: {mean, sd, ci95}}`` for the
analyses ``all_bound`` and ``global_fit``, and ``K_bias_from_assumption`` (relative), plus the
first-order budget, per-mixture and per-test ranges and the Monte Carlo details.
:func:`render_simulation` builds the terminal tables. Nothing here writes anything.
"""

from __future__ import annotations

import math
from typing import Any

from rich import box
from rich.console import Group, RenderableType
from rich.table import Table
from rich.text import Text

from planner.predict.montecarlo import CHUNK_TRIALS, ClassSpread, Simulation, Summary
from planner.predict.uncertainty import Budget, UncertaintyResult
from planner.report._format import percent, relative_bias, significant
from planner.report.jsonout import dumps

__all__ = [
    "SCHEMA",
    "TECHNIQUE_SCHEMA",
    "meaningful_K",
    "render_simulation",
    "render_techniques",
    "shown_all_bound",
    "simulation_document",
    "simulation_json",
    "technique_document",
    "technique_json",
]

#: Schema name and version of the document.
SCHEMA = "planner.simulate/2"
#: Budget rows shown in the terminal (the JSON holds them all).
TERMINAL_BUDGET_ROWS = 8

_GLOBAL_FIT_METHOD = (
    "global least-squares fit of eps and K with the full equilibrium model, every trial, by a "
    "vectorised Levenberg-Marquardt iteration on the model tabulated over log10 K "
    "(checked against scipy.optimize.least_squares)"
)


def _number(value: float) -> float | None:
    """A finite float, or None (JSON has no NaN: an analysis that failed every trial)."""
    return value if math.isfinite(value) else None


def _summary(summary: Summary) -> dict[str, Any]:
    return {
        "mean": _number(summary.mean),
        "sd": _number(summary.sd),
        "ci95": [_number(summary.ci95[0]), _number(summary.ci95[1])],
    }


def _budget(budget: Budget) -> dict[str, Any]:
    return {
        "value": budget.value,
        "u": budget.standard_uncertainty,
        "ci95": list(budget.ci95),
        "unit": budget.unit,
        "contributors": [
            {
                "input": row.input,
                "kind": row.kind,
                "u": row.standard_uncertainty,
                "unit": row.unit,
                "sensitivity": row.sensitivity,
                "contribution": row.contribution,
                "share": row.share,
                "formula": row.formula,
            }
            for row in budget.contributors
        ],
    }


def simulation_document(
    simulation: Simulation,
    gum: UncertaintyResult,
    *,
    title: str,
    seed: int,
    analysis: str = "all-bound",
    all_bound: bool = True,
) -> dict[str, Any]:
    """The virtual class as JSON-able data.

    Parameters
    ----------
    simulation
        From :func:`planner.predict.montecarlo.simulate`.
    gum
        From :func:`planner.predict.uncertainty.propagate` on the same plan.
    title
        The plan's title.
    seed
        The seed the generator was made from (so the run can be repeated).
    analysis
        The analysis the plan is designed for (``Plan.analysis``).
    all_bound
        False when the plan withholds the all-bound analysis's numbers (they would mean
        nothing on it): every all-bound value is then ``null``.

    Returns
    -------
    dict
        ``schema``, ``title``, ``trials``, ``seed``, ``epsilon`` and ``K`` (``all_bound`` and
        ``global_fit``, each ``mean``, ``sd``, ``ci95``), ``K_bias_from_assumption``, ``K_true``,
        ``epsilon_true``, ``gum`` (value, u, 95 % interval and budget of ``epsilon``,
        ``epsilon_intercept`` and ``K``), ``mixtures`` (each reading's distribution and
        first-order u), ``K_per_test``, ``K_spread`` (per analysis: ``class_size``,
        ``bench_sd`` inside a class, ``class_mean_sd`` from class to class; the stocks are
        one batch for the class) and ``monte_carlo`` (standard errors of the means, failed
        global fits, chunk size, method), ``analysis``, and in ``gum`` also ``global_fit``
        (budgets of ``epsilon`` and ``K`` of the global fit, or ``null``). A value no trial
        gave, or one the plan withholds, is ``null``.
    """
    bound, global_fit = simulation.all_bound, simulation.global_fit
    by_id = {m.id: m for m in gum.mixtures}

    def shown(value: Any) -> Any:
        return value if all_bound else None

    fit_budgets = (
        {"epsilon": _budget(gum.global_fit_epsilon), "K": _budget(gum.global_fit_K)}
        if gum.global_fit_epsilon is not None and gum.global_fit_K is not None
        else None
    )
    return {
        "schema": SCHEMA,
        "title": title,
        "trials": simulation.trials,
        "seed": seed,
        "analysis": analysis,
        "epsilon": {
            "all_bound": shown(_summary(bound.epsilon)),
            "global_fit": _summary(global_fit.epsilon),
        },
        "K": {"all_bound": shown(_summary(bound.K)), "global_fit": _summary(global_fit.K)},
        "K_spread": {
            "all_bound": shown(_class_spread(bound.K_spread)),
            "global_fit": _class_spread(global_fit.K_spread),
        },
        "K_bias_from_assumption": shown(_number(simulation.K_bias_from_assumption)),
        "K_true": simulation.K_true,
        "epsilon_true": simulation.epsilon_true,
        "gum": {
            "epsilon": shown(_budget(gum.epsilon)),
            "epsilon_intercept": shown(_budget(gum.epsilon_intercept)),
            "K": shown(_budget(gum.K)),
            "global_fit": fit_budgets,
        },
        "mixtures": [
            {
                "id": mixture_id,
                "reading": _summary(summary),
                "gum_absorbance": by_id[mixture_id].absorbance,
                "gum_u_absorbance": by_id[mixture_id].u_absorbance,
            }
            for mixture_id, summary in zip(simulation.mixture_ids, simulation.readings, strict=True)
        ],
        "K_per_test": [
            {"id": test_id, "all_bound": shown(_summary(summary))}
            for test_id, summary in zip(simulation.test_ids, simulation.K_per_test, strict=True)
        ],
        "monte_carlo": {
            "standard_error_of_mean": {
                "epsilon": {
                    "all_bound": shown(_number(bound.epsilon.standard_error)),
                    "global_fit": _number(global_fit.epsilon.standard_error),
                },
                "K": {
                    "all_bound": shown(_number(bound.K.standard_error)),
                    "global_fit": _number(global_fit.K.standard_error),
                },
            },
            "global_fit_failed": simulation.global_fit_failed,
            "chunk_trials": CHUNK_TRIALS,
            "global_fit_method": _GLOBAL_FIT_METHOD,
        },
    }


def _class_spread(spread: ClassSpread | None) -> dict[str, Any] | None:
    if spread is None:
        return None
    return {
        "class_size": spread.class_size,
        "classes": spread.classes,
        "bench_sd": _number(spread.bench_sd),
        "class_mean_sd": _number(spread.class_mean_sd),
    }


def simulation_json(simulation: Simulation, gum: UncertaintyResult, **options: Any) -> str:
    """:func:`simulation_document` (same keyword options) as one JSON text: sorted keys, full
    precision."""
    return dumps(simulation_document(simulation, gum, **options))


def _text(value: float, digits: int = 4) -> str:
    return significant(value, digits) if math.isfinite(value) else "-"


def _interval(interval: tuple[float, float], digits: int = 4) -> str:
    return f"{_text(interval[0], digits)} to {_text(interval[1], digits)}"


#: An SD more than this many times what the 95 % range gives a normal distribution ((high -
#: low) / (2 x 1.96)) is set by a few benches far out (heavy tails), and is marked.
_HEAVY_TAILS = 2.0


def _heavy_tailed(sd: float, ci95: tuple[float, float]) -> bool:
    width = (ci95[1] - ci95[0]) / (2 * 1.96)
    return math.isfinite(sd) and width > 0 and sd > _HEAVY_TAILS * width


def _spread(mean: float, sd: float, ci95: tuple[float, float]) -> tuple[str, str, str]:
    """The cells mean, sd and 95 % interval of one quantity; an SD set by a few benches far
    out is marked ``*`` (the table's caption says what it means)."""
    mark = "*" if _heavy_tailed(sd, ci95) else ""
    return _text(mean), _text(sd, 2) + mark, _interval(ci95)


def _results_table(
    simulation: Simulation, gum: UncertaintyResult, analysis: str, all_bound: bool
) -> Table:
    table = Table(
        title=f"Virtual class: {simulation.trials} benches",
        box=box.SIMPLE_HEAD,
        title_justify="left",
    )
    unit = gum.K.unit or "the measured species' units"
    table.add_column("Analysis")
    table.add_column("eps mean", justify="right")
    table.add_column("sd", justify="right")
    table.add_column("eps 95 %", justify="right")
    table.add_column("K mean", justify="right")
    table.add_column("sd", justify="right")
    table.add_column("K 95 %", justify="right")
    bound_rows: list[tuple[str, tuple[str, ...], str]] = []
    if all_bound:
        bound_rows = [
            (
                "all-bound",
                (
                    *_spread(
                        simulation.all_bound.epsilon.mean,
                        simulation.all_bound.epsilon.sd,
                        simulation.all_bound.epsilon.ci95,
                    ),
                    *_spread(
                        simulation.all_bound.K.mean,
                        simulation.all_bound.K.sd,
                        simulation.all_bound.K.ci95,
                    ),
                ),
                "",
            ),
            (
                "all-bound, GUM",
                (
                    *_spread(gum.epsilon.value, gum.epsilon.standard_uncertainty, gum.epsilon.ci95),
                    *_spread(gum.K.value, gum.K.standard_uncertainty, gum.K.ci95),
                ),
                "dim",
            ),
        ]
    fit = simulation.global_fit
    fit_rows: list[tuple[str, tuple[str, ...], str]] = [
        (
            "global fit",
            (
                *_spread(fit.epsilon.mean, fit.epsilon.sd, fit.epsilon.ci95),
                *_spread(fit.K.mean, fit.K.sd, fit.K.ci95),
            ),
            "",
        )
    ]
    if gum.global_fit_epsilon is not None and gum.global_fit_K is not None:
        e, k = gum.global_fit_epsilon, gum.global_fit_K
        fit_rows.append(
            (
                "global fit, GUM",
                (
                    *_spread(e.value, e.standard_uncertainty, e.ci95),
                    *_spread(k.value, k.standard_uncertainty, k.ci95),
                ),
                "dim",
            )
        )
    rows = fit_rows + bound_rows if analysis == "global-fit" else bound_rows + fit_rows
    for name, cells, style in rows:
        table.add_row(name, *cells, style=style or None)
    heavy = any(cell.endswith("*") for _, cells, _ in rows for cell in cells)
    withheld = (
        ""
        if all_bound
        else " The all-bound analysis does not suit this plan; its numbers are withheld."
    )
    table.caption = (
        f"eps in L mol⁻¹ cm⁻¹, K in {unit}. all-bound: limiting reagent "
        "assumed fully bound in the standards, curve through the origin, 1:1 K averaged over "
        "the tests; global fit: eps and K fitted together with the full equilibrium model; "
        f"GUM: first-order prediction of that analysis.{withheld}"
        + (
            " *: a few benches lie far out, so this SD is set by them (it is more than twice "
            "what the 95 % range gives a normal spread); the 95 % range is the better guide."
            if heavy
            else ""
        )
    )
    table.caption_justify = "left"
    return table


def _input_u(u: float, unit: str) -> str:
    """An input's u for the table: stock errors as a percentage, readings bare, volumes in mL."""
    if unit == "relative":
        return percent(u, 2)
    if unit == "absorbance":
        return significant(u, 2)
    return f"{significant(u, 2)} {unit}"


def _budget_table(budget: Budget, label: str, *, formulas: bool) -> Table:
    table = Table(
        title=(
            f"Uncertainty budget of {label}: u = {significant(budget.standard_uncertainty, 2)} "
            f"{budget.unit}"
        ),
        box=box.SIMPLE_HEAD,
        title_justify="left",
    )
    table.add_column("Input", min_width=24, ratio=3)
    table.add_column("u", justify="right", no_wrap=True)
    table.add_column("Sensitivity", justify="right", no_wrap=True)
    table.add_column("Share", justify="right", no_wrap=True)
    if formulas:
        table.add_column("Coefficient", overflow="fold", ratio=2)
    for row in budget.contributors[:TERMINAL_BUDGET_ROWS]:
        cells: list[str | Text] = [
            # Texts, not strings: input names and formulas hold stock ids and species names,
            # which rich would read as console markup.
            Text(row.input),
            _input_u(row.standard_uncertainty, row.unit),
            significant(row.sensitivity, 3),
            percent(row.share, 3),
        ]
        if formulas:
            cells.append(Text(row.formula.split(", where ", 1)[0]))
        table.add_row(*cells)
    rest = budget.contributors[TERMINAL_BUDGET_ROWS:]
    if rest:
        table.add_row(
            f"{len(rest)} more inputs",
            "",
            "",
            percent(sum(r.share for r in rest), 3),
            *([""] if formulas else []),
        )
    return table


def render_simulation(
    simulation: Simulation,
    gum: UncertaintyResult,
    *,
    formulas: bool = False,
    analysis: str = "all-bound",
    all_bound: bool = True,
) -> RenderableType:
    """The terminal report of a virtual class.

    Parameters
    ----------
    simulation, gum
        As for :func:`simulation_document`: the virtual class and the first-order budget.
    formulas
        Add each coefficient's chain of derivatives to the budgets (needs a wide terminal;
        the JSON document always has the chain and every derivative's formula).
    analysis, all_bound
        As for :func:`simulation_document`.

    Returns
    -------
    rich renderable
        The results per analysis (the one the plan is designed for first), the bias of the
        all-bound analysis, and the first-order budgets of K and eps of the analysis the plan
        is designed for (largest contributors first; ``--format json`` lists every
        contributor of both analyses with its coefficient's full formula).
    """
    parts: list[RenderableType] = [_results_table(simulation, gum, analysis, all_bound)]
    if all_bound:
        bias = Text("Bias of the all-bound K against the true K: ", style="bold")
        bias.append(
            f"{relative_bias(simulation.K_bias_from_assumption, 3)} for the virtual class's mean"
            if math.isfinite(simulation.K_bias_from_assumption)
            else "-"
        )
        # The answer key's bias is the noise-free one (the first-order prediction's K); the
        # class's mean moves further where the noise passes through the curvature of K.
        noise_free = gum.K.value / simulation.K_true - 1.0
        if math.isfinite(noise_free) and math.isfinite(simulation.K_bias_from_assumption):
            key = relative_bias(noise_free, 3)
            bias.append(
                ", as the answer key gives it (noise-free)"
                if key == relative_bias(simulation.K_bias_from_assumption, 3)
                else f", {key} noise-free as the answer key gives it (the rest is the noise "
                "carried through the curvature of the 1:1 expression)",
                style="",
            )
        bias.append(
            f" (true K {significant(simulation.K_true, 4)}"
            f"{' ' + gum.K.unit if gum.K.unit else ''}, true eps "
            f"{significant(simulation.epsilon_true, 4)} L mol⁻¹ cm⁻¹)",
            style="",
        )
        parts.append(bias)
    use_fit = analysis == "global-fit" or not all_bound
    spread = (simulation.global_fit if use_fit else simulation.all_bound).K_spread
    if spread is not None and spread.class_size > 1:
        parts.append(
            Text(
                f"{'Global-fit' if use_fit else 'All-bound'} K in classes of "
                f"{spread.class_size} benches sharing one batch of stocks: SD "
                f"{_text(spread.bench_sd, 2)} between the benches of a class, SD "
                f"{_text(spread.class_mean_sd, 2)} of the class mean from class to class."
            )
        )
    if simulation.global_fit_failed:
        parts.append(
            Text(
                f"{simulation.global_fit_failed} global fit(s) did not converge and are left out.",
                style="yellow",
            )
        )
    fit_k, fit_eps = gum.global_fit_K, gum.global_fit_epsilon
    if (analysis == "global-fit" or not all_bound) and fit_k is not None and fit_eps is not None:
        parts.append(_budget_table(fit_k, "K (global fit)", formulas=formulas))
        parts.append(_budget_table(fit_eps, "eps (global fit)", formulas=formulas))
    elif all_bound:
        parts.append(_budget_table(gum.K, "the mean K (all-bound)", formulas=formulas))
        parts.append(
            _budget_table(gum.epsilon, "eps (all-bound, through the origin)", formulas=formulas)
        )
    if not formulas:
        parts.append(
            Text(
                "Each coefficient's formula: planner simulate --format json (gum.*.contributors).",
                style="dim",
            )
        )
    return Group(*parts)


#: Schema name and version of the ``planner simulate --technique`` document.
TECHNIQUE_SCHEMA = "planner.simulate-techniques/1"


def _spread_cells(simulation: Simulation) -> dict[str, Any]:
    spread = simulation.all_bound.K_spread
    return {
        "class_size": spread.class_size if spread is not None else None,
        "bench_sd": _number(spread.bench_sd) if spread is not None else None,
        "class_mean_sd": _number(spread.class_mean_sd) if spread is not None else None,
    }


def meaningful_K(summary: Summary) -> bool:
    """True when a class's K is a number worth printing: finite, its SD and the low end of
    its 95 % range above zero (a range reaching K <= 0 means the analysis breaks down on
    some benches, and its mean and SD mean nothing)."""
    values = (summary.mean, summary.sd, *summary.ci95)
    return all(math.isfinite(v) for v in values) and summary.sd > 0 and summary.ci95[0] > 0


def shown_all_bound(simulations: dict[str, Simulation], all_bound: bool) -> dict[str, bool]:
    """Per preset, whether its all-bound K is shown: the plan gives that analysis's numbers
    (``all_bound``) and the preset's class gives a meaningful K (:func:`meaningful_K`)."""
    return {name: all_bound and meaningful_K(sim.all_bound.K) for name, sim in simulations.items()}


def technique_document(
    simulations: dict[str, Simulation],
    *,
    title: str,
    seed: int,
    analysis: str = "all-bound",
    all_bound: bool = True,
) -> dict[str, Any]:
    """``planner simulate --technique``: the same recipes under each bench preset.

    ``techniques`` maps each preset to its K of both analyses (mean, sd, ci95), the all-bound
    K's bench-to-bench SD inside a class and the SD of the class mean (the stocks are one
    batch for the class). ``analysis`` is the one the plan is designed for; the all-bound
    values of a preset are ``null`` where the plan withholds that analysis or the preset's
    class gives no meaningful K with it (:func:`meaningful_K`).
    """
    shown = shown_all_bound(simulations, all_bound)
    return {
        "schema": TECHNIQUE_SCHEMA,
        "title": title,
        "seed": seed,
        "analysis": analysis,
        "techniques": {
            name: {
                "trials": sim.trials,
                "K": {
                    "all_bound": _summary(sim.all_bound.K) if shown[name] else None,
                    "global_fit": _summary(sim.global_fit.K),
                },
                "K_true": sim.K_true,
                "K_spread_all_bound": _spread_cells(sim) if shown[name] else None,
            }
            for name, sim in simulations.items()
        },
    }


def technique_json(simulations: dict[str, Simulation], **options: Any) -> str:
    """:func:`technique_document` as one JSON text: sorted keys, full precision."""
    return dumps(technique_document(simulations, **options))


def render_techniques(
    simulations: dict[str, Simulation], *, analysis: str = "all-bound", all_bound: bool = True
) -> RenderableType:
    """The presets side by side: K of each analysis (the plan's first), its 95 % range, and
    the spread inside a class against that of the class mean; an all-bound K that would mean
    nothing is withheld, and the note says why."""
    shown = shown_all_bound(simulations, all_bound)
    table = Table(
        title="Virtual class by bench preset (K, L/mol)",
        box=box.SIMPLE_HEAD,
        title_justify="left",
    )
    for heading in (
        "preset",
        "analysis",
        "mean",
        "SD",
        "95 % of benches",
        "in class",
        "class mean",
    ):
        table.add_column(heading, justify="left" if heading in {"preset", "analysis"} else "right")
    for name, sim in simulations.items():
        rows = [
            ("all-bound", sim.all_bound.K, sim.all_bound.K_spread),
            ("global fit", sim.global_fit.K, sim.global_fit.K_spread),
        ]
        if analysis == "global-fit":
            rows.reverse()
        for label, summary, within in rows:
            if label == "all-bound" and not shown[name]:
                table.add_row(name, label, "withheld", "", "", "", "", style="dim")
                continue
            mean, sd, interval = _spread(summary.mean, summary.sd, summary.ci95)
            table.add_row(
                name,
                label,
                mean,
                sd,
                interval,
                _text(within.bench_sd, 2) if within is not None else "-",
                _text(within.class_mean_sd, 2) if within is not None else "-",
            )
    text = (
        "'in class': SD of K between the benches of one class (one batch of stocks); "
        "'class mean': SD of the class's mean K from class to class."
    )
    if not all_bound:
        text += " The all-bound analysis does not suit this plan; its numbers are withheld."
    else:
        broken = [name for name, ok in shown.items() if not ok]
        if broken:
            text += (
                f" All-bound K withheld for {', '.join(broken)}: its 95 % range reaches K <= 0, "
                "so the analysis breaks down on some benches and its mean and SD mean nothing."
            )
    return Group(table, Text(text))
