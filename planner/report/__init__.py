"""Presentation: plan results to JSON, terminal renderables, sheets, plots and folders."""

from __future__ import annotations

from os import PathLike
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from planner.result import Plan

__all__ = ["write_reports"]


def write_reports(
    plan: Plan, out: str | PathLike[str], *, date: str, force: bool = False, plots: bool = True
) -> None:
    """Write a plan's output folder (plan.json, sheets, answer key, CSV, plots) atomically.

    Parameters
    ----------
    plan
        A finished plan from :func:`planner.design_plan`.
    out
        The folder; refused when it exists and is not empty, unless ``force``.
    date
        Date printed on the sheets.
    force
        Replace a non-empty folder that the planner wrote (it carries a ``.planner-output``
        file) and that holds nothing else; never the current, home or root folder or a folder
        holding one of them (see :func:`planner.report.outdir.write_output_folder`).
    plots
        Also draw the plots into ``plots/`` (PNG and SVG) and show them on the answer key.
    """
    from planner.report.outdir import plan_files, write_output_folder

    write_output_folder(Path(out), plan_files(plan, date=date, plots=plots), force=force)
