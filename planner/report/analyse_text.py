"""``planner analyse``: the terminal report (rich renderables, fits 80 columns)."""

from __future__ import annotations

import math
from typing import Any

from planner.readings.analyse import ClassAnalysis, ClassStatistic
from planner.report._format import significant

__all__ = ["render_analysis"]


def _value(value: float, digits: int = 4) -> str:
    """A value to ``digits`` significant figures (uncertainties and SDs to 2), "-" if none."""
    return significant(value, digits) if math.isfinite(value) else "-"


def _sets(keys: tuple[tuple[int, int, int], ...]) -> str:
    return ", ".join(f"{s}/{b}/{r}" for s, b, r in keys)


def not_analysed(result: ClassAnalysis) -> list[str]:
    """One sentence for each kind of set of mixtures the analysis could not use, so no set
    of the plan goes unmentioned, led by a warning when most rows were rejected (readings of
    another plan, as a rule); the text and HTML reports print these."""
    lines = []
    accepted = sum(len(b.rows) for b in result.benches)
    rejected = len(result.rejections)
    if rejected > accepted:
        lines.append(
            f"Most rows were rejected ({rejected} of {rejected + accepted}): check that these "
            "are the readings of this plan or variants folder (--plan), section by section."
        )
    if result.unmeasured:
        lines.append(
            f"Not measured (section/bench/replicate, all cells empty): {_sets(result.unmeasured)}."
        )
    if result.lost:
        lines.append(
            "Not analysed, every row rejected (section/bench/replicate): "
            f"{_sets(result.lost)}. Their results were given but none could be used: see the "
            "rejected rows."
        )
    if result.n_absent:
        more = result.n_absent - len(result.absent)
        lines.append(
            f"No rows in the file for {result.n_absent} set(s) of mixtures the plan has "
            f"(section/bench/replicate): {_sets(result.absent)}"
            + (f", and {more} more." if more else ".")
        )
    if result.sections_without_rows:
        listed = ", ".join(str(n) for n in result.sections_without_rows)
        lines.append(f"No rows in the file for section(s) {listed}.")
    return lines


def _statistic_line(name: str, statistic: ClassStatistic) -> str:
    observed = (
        f"mean {_value(statistic.mean)}, SD {_value(statistic.sd, 2)}, 95 % "
        f"{_value(statistic.low)}-{_value(statistic.high)} (n = {statistic.n})"
        if statistic.n
        else "no bench ok"
    )
    predicted = (
        f"predicted {_value(statistic.predicted)} "
        f"({_value(statistic.predicted_low)}-{_value(statistic.predicted_high)})"
    )
    return f"{name}: {observed}; {predicted}"


def render_analysis(result: ClassAnalysis) -> Any:
    """The analysis for people: benches with status and flags, the class, rejected rows.

    Returns
    -------
    rich.console.Group
        Text passed as :class:`rich.text.Text` (never markup): ids and evidence may hold
        brackets.
    """
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    table = Table(title="Benches", title_justify="left", expand=False)
    for column, justify in (
        ("Sec", "right"),
        ("Bench", "right"),
        ("Rep", "right"),
        ("K all-bound", "right"),
        ("K global fit", "right"),
        ("Status", "left"),
    ):
        table.add_column(column, justify=justify)  # type: ignore[arg-type]
    for b in result.benches:
        status = "ok" if not b.flags else "flagged: " + ", ".join(f.rule for f in b.flags)
        table.add_row(
            str(b.section),
            str(b.bench),
            str(b.replicate),
            _value(b.K_all_bound.value),
            _value(b.K_global_fit.value),
            Text(status, style="" if not b.flags else "bold"),
        )
    parts: list[Any] = [table]
    flagged = [b for b in result.benches if b.flags]
    if flagged:
        parts.append(Text("Flagged benches", style="bold"))
        for b in flagged:
            for flag in b.flags:
                parts.append(
                    Text(
                        f"  section {b.section} bench {b.bench} replicate {b.replicate}: "
                        f"{flag.rule}: {flag.evidence}. Likely cause: {flag.cause}. "
                        f"Threshold: {flag.threshold}."
                    )
                )
    ok = sum(1 for b in result.benches if not b.flags)
    lines = [
        f"Class: {len(result.benches)} bench sets, {ok} ok, {len(flagged)} flagged"
        + (f"; {len(result.lost)} more with every row rejected." if result.lost else "."),
        _statistic_line("K, all-bound", result.K_all_bound),
        _statistic_line("K, global fit", result.K_global_fit),
        _statistic_line("eps, all-bound", result.epsilon_all_bound),
        _statistic_line("eps, global fit", result.epsilon_global_fit),
    ]
    pooled = result.pooled
    unit = f" {result.K_unit}" if result.K_unit else ""
    if pooled is not None:
        lack = (
            f"lack of fit F = {_value(pooled.lack_of_fit_F, 3)} on {pooled.df_lack_of_fit} and "
            f"{pooled.df_pure_error} df, p = {_value(pooled.lack_of_fit_p, 2)}"
            if math.isfinite(pooled.lack_of_fit_F)
            else "lack of fit not tested (no replicate benches)"
        )
        which = "analysed (none was ok)" if pooled.includes_flagged else "ok"
        lines.append(
            f"Pooled global fit of {pooled.n_readings} readings from {pooled.n_benches} "
            f"{which} benches: K = {_value(pooled.K)} (u {_value(pooled.u_K, 2)}){unit}, eps = "
            f"{_value(pooled.epsilon)} (u {_value(pooled.u_epsilon, 2)}) L mol-1 cm-1; RMS "
            f"residual {_value(pooled.rms_residual, 2)}; {lack}. The plan assumes K = "
            f"{_value(result.K_true)}{unit}."
        )
    parts.extend(Text(line) for line in lines)
    parts.extend(Text(line, style="bold") for line in not_analysed(result))
    if result.rejections:
        parts.append(Text(f"Rejected rows ({len(result.rejections)})", style="bold"))
        for r in result.rejections:
            column = f", column {r.column}" if r.column else ""
            parts.append(Text(f"  row {r.row}{column}: {r.problem} (got {r.value}). Fix: {r.hint}"))
    return Group(*parts)
