"""The output folder of ``planner plan --out DIR``: what goes in it, and writing it safely.

:func:`plan_files` builds the folder's contents as text (and, on request, the plots as PNG and
SVG bytes under ``plots/``), keyed by relative file name;
:func:`write_output_folder` is the one place in the report layer that writes files. It builds
the whole folder beside the target and swaps it in with renames, so a reader never sees a
half-written folder and a failure leaves the previous folder as it was.

Bench sheets: every bench of a section makes the same recipes, so a sheet differs between
benches only in its header. Up to :data:`MAX_BENCH_FILES` benches in the whole session, each
bench gets its own numbered sheet (``benches/section-01-bench-01.md`` and ``.html``); beyond
that, one sheet per section with a blank for the bench number (``benches/section-01.md``),
to be copied for every bench, keeps the folder browsable. In both cases
``bench-sheets.html`` holds all those pages in one document, one per printed page.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Mapping
from pathlib import Path, PurePosixPath, PureWindowsPath
from typing import Literal, overload

from planner.errors import OutputError
from planner.report.plan_json import plan_json
from planner.report.sheets import (
    BenchSlot,
    answer_key_html,
    answer_key_md,
    bench_sheet_html,
    bench_sheets,
    mixtures_csv,
    prep_sheet_html,
    prep_sheet_md,
)
from planner.result import Plan

__all__ = [
    "MAX_BENCH_FILES",
    "bench_slots",
    "check_output_target",
    "plan_files",
    "write_output_folder",
]

#: Most benches in a session that get one numbered sheet each; more get one sheet per section.
MAX_BENCH_FILES = 60


def bench_slots(
    plan: Plan, *, section: int | None = None, of_sections: int | None = None
) -> list[BenchSlot]:
    """The pipetting-sheet pages of a plan: one per bench, or one per section when there are
    more than :data:`MAX_BENCH_FILES` benches in the session.

    With ``section`` (a variant plan serving one section of ``of_sections``) the pages are
    numbered for that section only.
    """
    session = plan.inputs.session
    numbers = [section] if section is not None else list(range(1, session.sections + 1))
    if len(numbers) * session.benches_per_section <= MAX_BENCH_FILES:
        return [
            BenchSlot(section=number, bench=bench, of_sections=of_sections)
            for number in numbers
            for bench in range(1, session.benches_per_section + 1)
        ]
    return [BenchSlot(section=number, of_sections=of_sections) for number in numbers]


def _slot_name(slot: BenchSlot, section_width: int, bench_width: int) -> str:
    name = f"section-{slot.section:0{section_width}d}"
    if slot.bench is not None:
        name += f"-bench-{slot.bench:0{bench_width}d}"
    return name


@overload
def plan_files(
    plan: Plan,
    *,
    date: str,
    section: int | None = None,
    of_sections: int | None = None,
    plots: Literal[False] = False,
) -> dict[str, str]: ...


@overload
def plan_files(
    plan: Plan,
    *,
    date: str,
    section: int | None = None,
    of_sections: int | None = None,
    plots: bool,
) -> dict[str, str | bytes]: ...


def plan_files(
    plan: Plan,
    *,
    date: str,
    section: int | None = None,
    of_sections: int | None = None,
    plots: bool = False,
) -> dict[str, str] | dict[str, str | bytes]:
    """The contents of a plan's output folder.

    Parameters
    ----------
    plan
        A finished plan.
    date
        The date printed on the sheets (the caller reads the clock, not the report layer).
    section, of_sections
        For a variant plan serving one section: its number and the number of sections.
    plots
        Also draw the plan's plots (:func:`planner.report.plots.plan_plots`: the calibration
        ladder, bound fraction against the excess, the tests' coverage of bound fraction,
        those that apply) into ``plots/<stem>.png`` and ``.svg``, and show them on the answer
        key. Off by default: drawing imports matplotlib and takes most of a second.

    Returns
    -------
    dict
        Relative file name -> text (bytes for the plots): ``plan.json``, ``mixtures.csv``,
        ``prep-sheet.md`` and ``.html``, ``answer-key.md`` and ``.html``,
        ``bench-sheets.html`` (every pipetting sheet, one per page), ``plots/*.png`` and
        ``plots/*.svg`` with ``plots``, and ``benches/section-NN-bench-NN.md`` and ``.html``
        per bench, or ``benches/section-NN.md`` and ``.html`` per section when the session has
        more than :data:`MAX_BENCH_FILES` benches. Numbers are zero-padded to at least two
        digits.
    """
    session = plan.inputs.session
    section_width = max(2, len(str(of_sections or session.sections)))
    bench_width = max(2, len(str(session.benches_per_section)))
    slots = bench_slots(plan, section=section, of_sections=of_sections)
    figures: dict[str, bytes] = {}
    if plots:
        from planner.report.plots import plan_plots

        figures = plan_plots(plan)
    # The answer key shows each plot that is in the folder, in the order they were drawn.
    stems = tuple(dict.fromkeys(PurePosixPath(name).stem for name in figures))
    files: dict[str, str] = {
        "plan.json": plan_json(plan),
        "mixtures.csv": mixtures_csv(plan),
        "prep-sheet.md": prep_sheet_md(plan, date=date),
        "prep-sheet.html": prep_sheet_html(plan, date=date),
        "answer-key.md": answer_key_md(plan, date=date, plots=stems),
        "answer-key.html": answer_key_html(plan, date=date, plots=stems),
        "bench-sheets.html": bench_sheet_html(plan, date=date, slots=slots),
    }
    for slot, (markdown, html) in zip(
        slots, bench_sheets(plan, date=date, slots=slots), strict=True
    ):
        stem = "benches/" + _slot_name(slot, section_width, bench_width)
        files[stem + ".md"] = markdown
        files[stem + ".html"] = html
    if not plots:
        return files
    every: dict[str, str | bytes] = dict(files)
    every.update(figures)
    return every


def _relative_path(name: str) -> PurePosixPath:
    """A file name as a safe relative path inside the folder, or an OutputError."""
    path = PurePosixPath(name)
    unsafe = (
        not name
        or "\\" in name
        or "\0" in name
        or path.is_absolute()
        or bool(PureWindowsPath(name).drive)
        or ".." in path.parts
        or not path.parts
        or path == PurePosixPath(".")
    )
    if unsafe:
        raise OutputError(
            "an output file name must be a relative path inside the folder",
            field="files",
            value=name,
            hint="use names such as 'plan.json' or 'benches/section-01.md', without '..', "
            "a leading '/', a drive or backslashes",
        )
    return path


def _check_names(files: Mapping[str, bytes | str]) -> dict[PurePosixPath, bytes]:
    contents: dict[PurePosixPath, bytes] = {}
    for name, content in files.items():
        path = _relative_path(name)
        if path in contents:
            raise OutputError(
                "two output files have the same name", field="files", value=name, hint=""
            )
        contents[path] = content.encode("utf-8") if isinstance(content, str) else bytes(content)
    for path in contents:
        for parent in path.parents:
            if parent in contents:
                raise OutputError(
                    "an output file name is also used as a folder",
                    field="files",
                    value=str(parent),
                    hint="give the file another name",
                )
    return contents


def _write_file(path: Path, data: bytes) -> None:
    """Write one new file (exclusive create, bytes as given: no newline translation)."""
    with path.open("xb") as handle:
        handle.write(data)


def _check_target(target: Path, *, force: bool) -> None:
    if not target.exists() and not target.is_symlink():
        return
    if not target.is_dir():
        raise OutputError(
            f"the output path {target} exists and is not a folder",
            field="--out",
            value=str(target),
            hint="choose a folder name that is not taken by a file",
        )
    if not force and any(target.iterdir()):
        raise OutputError(
            f"the output folder {target} exists and is not empty",
            field="--out",
            value=str(target),
            hint="pass --force to replace it, or choose another folder",
        )


def check_output_target(target: Path, *, force: bool) -> None:
    """Refuse an output folder early, before the work of filling it (same rules and errors as
    :func:`write_output_folder`, which checks again when it writes).

    Raises
    ------
    OutputError
        ``target`` is a file, or a non-empty folder and ``force`` is false.
    """
    _check_target(Path(os.path.normpath(os.path.abspath(target))), force=force)


def write_output_folder(target: Path, files: Mapping[str, bytes | str], *, force: bool) -> None:
    """Write a folder of files, replacing ``target`` as a whole.

    The files are written into a fresh folder inside a temporary folder beside ``target`` (same
    parent, so the renames that follow stay on one file system and are atomic). Then an
    existing ``target`` is renamed away, the new folder is renamed in, and the old one is
    deleted. On any failure before the new folder is in place, the temporary folder is removed
    and an existing ``target`` is left as it was.

    Parameters
    ----------
    target
        The output folder. Its parent is created if missing.
    files
        Relative file name (``/``-separated, e.g. ``benches/section-01.md``) -> content; text
        is written as UTF-8 exactly as given.
    force
        Replace a ``target`` that exists and is not empty. An empty folder is always replaced.

    Raises
    ------
    OutputError
        ``target`` is not empty and ``force`` is false, or is a file; a file name is absolute,
        contains ``..``, a drive or a backslash, or collides with another; the folder could not
        be written (the message names the folder).
    """
    # Lexically normalised, so "sub/x/../named" creates only sub/named (no empty sub/x).
    target = Path(os.path.normpath(os.path.abspath(target)))
    contents = _check_names(files)
    _check_target(target, force=force)
    parent = target.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.tmp-", dir=parent))
    except OSError as error:
        raise OutputError(
            f"cannot create the output folder {target}: {error.strerror or error}",
            field="--out",
            value=str(target),
            hint="check that the parent folder exists and is writable",
        ) from error
    fresh = staging / "new"
    previous = staging / "old"
    moved_away = False
    try:
        # mkdir honours the umask; mkdtemp's own folder is private (0700), which is why it only
        # serves as a holder and never becomes the output folder itself.
        fresh.mkdir()
        for path, data in contents.items():
            destination = fresh.joinpath(*path.parts)
            destination.parent.mkdir(parents=True, exist_ok=True)
            _write_file(destination, data)
        if target.exists() or target.is_symlink():
            os.replace(target, previous)
            moved_away = True
        os.replace(fresh, target)
    except BaseException as error:
        if moved_away and not target.exists():
            os.replace(previous, target)
        shutil.rmtree(staging, ignore_errors=True)
        if isinstance(error, OSError):
            raise OutputError(
                f"cannot write the output folder {target}: {error.strerror or error}",
                field="--out",
                value=str(target),
                hint="check the disk space and the permissions of the parent folder; "
                "any previous folder was left as it was",
            ) from error
        raise
    try:
        shutil.rmtree(staging)
    except OSError as error:
        raise OutputError(
            f"the new output folder {target} is in place, but the old copy in {staging} could "
            f"not be removed: {error.strerror or error}",
            field="--out",
            value=str(staging),
            hint="delete that folder by hand",
        ) from error
