"""The files ``planner analyse`` reads: a plan or variants folder, and the readings CSV.

The boundary of the readings analysis: :func:`load_plans` finds the saved plan of every
section (``plan.json`` of a plan folder serves all its sections; a variants folder holds
``section-NN/plan.json``, one per section) and :func:`load_readings` reads the CSV with
:func:`planner.fileio.text.read_text` and checks every row against those sections.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from pathlib import Path

from planner.errors import ReadingsFileError, ResultFileError
from planner.fileio.text import READINGS_FILE, read_text
from planner.readings.table import ReadingsTable, SectionShape, parse_readings
from planner.resultfile import SavedPlan, load_result

__all__ = ["load_plans", "load_readings", "section_shapes"]

_SECTION_FOLDER = re.compile(r"section-([0-9]{1,4})")


def load_plans(folder: str | os.PathLike[str]) -> dict[int, SavedPlan]:
    """The saved plan of every section of a plan folder or a variants folder.

    Parameters
    ----------
    folder
        What ``planner plan --out`` wrote (``plan.json`` inside: its plan serves sections 1 to
        ``session.sections``), or what ``planner variants --out`` wrote (``section-NN/plan.json``
        inside: each serves its own section NN).

    Returns
    -------
    dict
        Section number -> saved plan.

    Raises
    ------
    ResultFileError
        The folder holds neither, or a plan.json cannot be read (the message names it).
    """
    root = Path(folder)
    if not root.is_dir():
        raise ResultFileError(
            "not a folder",
            field="--plan",
            value=str(folder),
            hint="give the folder that planner plan --out or planner variants --out wrote",
        )
    single = root / "plan.json"
    if single.is_file():
        saved = load_result(single)
        return dict.fromkeys(range(1, saved.inputs.session.sections + 1), saved)
    plans: dict[int, SavedPlan] = {}
    for child in sorted(root.iterdir()):
        match = _SECTION_FOLDER.fullmatch(child.name)
        if match and (child / "plan.json").is_file():
            plans[int(match.group(1))] = load_result(child / "plan.json")
    if not plans:
        raise ResultFileError(
            "neither a plan folder (plan.json) nor a variants folder (section-NN/plan.json)",
            field="--plan",
            value=str(folder),
            hint="give the folder that planner plan --out or planner variants --out wrote",
        )
    return plans


def section_shapes(plans: Mapping[int, SavedPlan]) -> dict[int, SectionShape]:
    """What each section has: mixtures, benches and replicates, to check rows against."""
    return {
        number: SectionShape(
            mixtures=tuple(m.id for m in saved.mixtures),
            benches=saved.inputs.session.benches_per_section,
            replicates=saved.inputs.session.replicates,
        )
        for number, saved in plans.items()
    }


def load_readings(path: str | os.PathLike[str], plans: Mapping[int, SavedPlan]) -> ReadingsTable:
    """Read a readings CSV against the sections' plans.

    Raises
    ------
    ReadingsFileError
        The file cannot be read (not a regular file, too large, not UTF-8) or used (see
        :func:`planner.readings.parse_readings`); the message names the file, row and column.
    """
    name = os.fspath(path)
    text = read_text(name, READINGS_FILE)
    if "\x00" in text:
        raise ReadingsFileError(
            f"the readings file {name} holds NUL bytes: it is not CSV text",
            hint="save the sheet as CSV (comma-separated values), UTF-8",
        )
    return parse_readings(text, section_shapes(plans), source=name)
