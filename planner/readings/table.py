"""A class's readings file: CSV text to readings, every row either accepted or listed.

The file is the readings template (``readings-template.csv``, written beside the sheets) with
the absorbance filled in: a header row naming the columns :data:`COLUMNS` (in any order,
case and surrounding spaces ignored; other columns are allowed and not read), then one row
per section, bench, replicate and mixture.

Rules (``docs/guide.md``, "Reading a class's results back"):

- **Errors** (the file cannot be used; :class:`planner.errors.ReadingsFileError`, exit 2):
  not UTF-8 text, not CSV (an unterminated quote), no header row, a column of
  :data:`COLUMNS` missing or named twice, or no readings at all. The message names the row
  (line of the file, the header is row 1) and the column.
- **Rejections** (the row is left out of the analysis and listed in the report): a row whose
  cells do not match the header, a section, bench, replicate or mixture the plan does not
  have, a number that is not a whole number or not a number, NaN or infinity, an absorbance
  outside :data:`MIN_ABSORBANCE` to :data:`MAX_ABSORBANCE`, or a repeated row (a row
  repeating another with the same reading is rejected as a repeat; rows giving different
  readings for one mixture are all rejected, since which is right cannot be told).
- **Not measured**: an empty absorbance cell. A bench whose cells are all empty was not
  measured and is listed as such; otherwise its empty mixtures are missing mixtures, a flag
  of the bench.

No row is dropped silently: every data row is an accepted reading, a rejection, or an empty
cell accounted for above; blank lines hold nothing and are skipped.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Mapping, Sequence
from typing import NoReturn

from planner.errors import ReadingsFileError, shown
from planner.records import record

__all__ = [
    "COLUMNS",
    "MAX_ABSORBANCE",
    "MIN_ABSORBANCE",
    "BenchKey",
    "Reading",
    "ReadingsTable",
    "Rejection",
    "SectionShape",
    "parse_readings",
]

#: The columns a readings file must have (the template's header).
COLUMNS = ("section", "bench", "replicate", "mixture", "absorbance")
#: Largest absorbance accepted: bench photometers report readings from 0 to about 3-4
#: (common practice; above that almost no light reaches the detector and stray light rules).
MAX_ABSORBANCE = 4.0
#: Smallest absorbance accepted. A blank read against the solvent the photometer was zeroed
#: on scatters about 0 by the photometer's noise, a few thousandths, so a slightly negative
#: reading is a real one; below this the photometer was zeroed on something else (common
#: practice).
MIN_ABSORBANCE = -0.05

#: One bench's set of mixtures: (section, bench, replicate).
BenchKey = tuple[int, int, int]


@record
class SectionShape:
    """What one section of the plan has, to check each row against.

    Attributes
    ----------
    benches
        Benches in the section (numbered from 1).
    replicates
        Sets of mixtures per bench (numbered from 1).
    mixtures
        The ids of the section's mixtures, in plan order.
    """

    benches: int
    replicates: int
    mixtures: tuple[str, ...]


@record
class Reading:
    """One accepted reading.

    Attributes
    ----------
    row
        Row of the file it came from (the header is row 1).
    section, bench, replicate
        Which bench's set of mixtures.
    mixture
        The mixture id.
    absorbance
        The reading, blank not subtracted [unitless].
    """

    row: int
    section: int
    bench: int
    replicate: int
    mixture: str
    absorbance: float


@record
class Rejection:
    """A row left out of the analysis, and why.

    Attributes
    ----------
    row
        Row of the file (the header is row 1).
    column
        The column at fault, or ``""`` for the whole row.
    value
        The cell's text as given (shortened for display).
    problem
        What is wrong.
    hint
        How to fix it.
    bench_set
        (section, bench, replicate) of the row when the plan has that set of mixtures, else
        None: so a set whose every row is rejected is still named.
    """

    row: int
    column: str
    value: str
    problem: str
    hint: str
    bench_set: BenchKey | None = None


@record
class ReadingsTable:
    """A readings file, read.

    Attributes
    ----------
    readings
        Every accepted reading, in file order.
    rejections
        Every rejected row, in file order.
    empty
        Every row with an empty absorbance cell: (row, section, bench, replicate, mixture).
    """

    readings: tuple[Reading, ...]
    rejections: tuple[Rejection, ...]
    empty: tuple[tuple[int, int, int, int, str], ...]


def _error(row: int, column: str, problem: str, value: object = None, hint: str = "") -> NoReturn:
    field = f"row {row}" + (f", column {column}" if column else "")
    if value is None:
        raise ReadingsFileError(problem, field=field, hint=hint)
    raise ReadingsFileError(problem, field=field, value=value, hint=hint)


def _header_hint(cells: list[str]) -> str:
    """Why a header row lacks the columns, when the row itself shows it."""
    if len(cells) == 1 and (";" in cells[0] or "\t" in cells[0]):
        separator = "';'" if ";" in cells[0] else "a tab"
        return (
            f"the cells are separated by {separator}, not commas (a spreadsheet set to another "
            "list separator): save the sheet as comma-separated CSV; "
        )
    first = cells[0].strip() if cells else ""
    if _whole(first) is not None:
        return "the first row holds readings, not the column names; "
    return ""


def _header(cells: list[str], row: int, source: str) -> dict[str, int]:
    names = [cell.strip().lower() for cell in cells]
    where: dict[str, int] = {}
    for position, name in enumerate(names):
        if name in COLUMNS and name in where:
            _error(
                row,
                name,
                "column named twice in the header",
                hint="keep one column of each name",
            )
        where.setdefault(name, position)
    for name in COLUMNS:
        if name not in where:
            _error(
                row,
                name,
                f"missing column in the header row of {source}",
                ",".join(cells),
                f"{_header_hint(cells)}the header must name the columns {','.join(COLUMNS)} "
                "(as the readings-template.csv written beside the sheets does)",
            )
    return where


def _whole(text: str) -> int | None:
    text = text.strip()
    if not text or not text.isascii() or not text.isdigit():
        return None
    return int(text) if len(text) <= 9 else None


def _outside_plan(
    shape: SectionShape, section: int, bench: int, replicate: int, mixture: str
) -> tuple[str, str, str] | None:
    """The first of a row's bench, replicate and mixture that its section's plan lacks, as
    (column, problem, hint); None when the plan has all three."""
    if bench > shape.benches:
        return (
            "bench",
            f"section {section} has {shape.benches} benches",
            f"benches are 1 to {shape.benches}",
        )
    if replicate > shape.replicates:
        return (
            "replicate",
            f"the plan makes {shape.replicates} set(s) of mixtures per bench",
            f"replicates are 1 to {shape.replicates}",
        )
    if mixture not in shape.mixtures:
        same = [m for m in shape.mixtures if m.casefold() == mixture.casefold()]
        return (
            "mixture",
            f"section {section}'s plan has no such mixture",
            (f"did you mean {same[0]}? " if same else "")
            + f"mixtures are {', '.join(shape.mixtures)}",
        )
    return None


def parse_readings(
    text: str, sections: Mapping[int, SectionShape], *, source: str = "the readings file"
) -> ReadingsTable:
    """Read a class's readings CSV against the plan's sections.

    Parameters
    ----------
    text
        The file's text (UTF-8 already decoded).
    sections
        Section number -> what that section has.
    source
        How messages name the file.

    Returns
    -------
    ReadingsTable
        Accepted readings, rejected rows and empty cells (see the module notes).

    Raises
    ------
    ReadingsFileError
        The file cannot be used: not CSV, no header, a missing column, or no reading at all;
        the message names the row and column.
    """
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    rows: list[tuple[int, list[str]]] = []
    try:
        for cells in reader:
            rows.append((reader.line_num, cells))
    except csv.Error as exc:
        _error(
            reader.line_num,
            "",
            f"not CSV text in {source} ({exc})",
            hint="save the sheet as CSV (comma-separated values)",
        )
    header_at = next(
        (i for i, (_, cells) in enumerate(rows) if any(c.strip() for c in cells)), None
    )
    if header_at is None:
        _error(1, "", f"{source} is empty: no header row", hint=f"start with {','.join(COLUMNS)}")
    header_row, header_cells = rows[header_at]
    where = _header(header_cells, header_row, source)
    width = len(header_cells)
    rejections: list[Rejection] = []
    empty: list[tuple[int, int, int, int, str]] = []
    candidates: list[Reading] = []

    def reject(
        row: int,
        column: str,
        value: str,
        problem: str,
        hint: str,
        bench_set: BenchKey | None = None,
    ) -> None:
        rejections.append(Rejection(row, column, shown(value, 40), problem, hint, bench_set))

    for row, cells in rows[header_at + 1 :]:
        if not any(cell.strip() for cell in cells):
            continue  # a blank line holds nothing
        if len(cells) != width:
            reject(
                row,
                "",
                ",".join(cells),
                f"{len(cells)} cells where the header has {width}",
                "give every row one cell per column of the header",
            )
            continue
        cell = {name: cells[where[name]] for name in COLUMNS}
        numbers: dict[str, int] = {}
        bad = False
        for name in ("section", "bench", "replicate"):
            number = _whole(cell[name])
            if number is None or number < 1:
                reject(
                    row, name, cell[name], "not a whole number from 1", f"write the {name} number"
                )
                bad = True
            else:
                numbers[name] = number
        if bad:
            continue
        section, bench, replicate = numbers["section"], numbers["bench"], numbers["replicate"]
        shape = sections.get(section)
        if shape is None:
            reject(
                row,
                "section",
                cell["section"],
                "the plan has no such section",
                f"sections are {_listing(sorted(sections))}",
            )
            continue
        mixture = cell["mixture"].strip()
        key = (
            (section, bench, replicate)
            if bench <= shape.benches and replicate <= shape.replicates
            else None
        )
        outside = _outside_plan(shape, section, bench, replicate, mixture)
        if outside is not None:
            column, problem, hint = outside
            reject(row, column, cell[column], problem, hint, key)
            continue
        absorbance_text = cell["absorbance"].strip()
        if not absorbance_text:
            empty.append((row, section, bench, replicate, mixture))
            continue
        try:
            absorbance = float(absorbance_text)
        except ValueError:
            reject(
                row,
                "absorbance",
                cell["absorbance"],
                "not a number",
                "write the reading as a decimal number with a point, e.g. 0.512",
                key,
            )
            continue
        if not math.isfinite(absorbance):
            reject(
                row,
                "absorbance",
                cell["absorbance"],
                "not a finite number",
                "write the reading",
                key,
            )
            continue
        if not MIN_ABSORBANCE <= absorbance <= MAX_ABSORBANCE:
            reject(
                row,
                "absorbance",
                cell["absorbance"],
                f"outside {MIN_ABSORBANCE:g} to {MAX_ABSORBANCE:g}, what a photometer zeroed "
                "on the solvent reads",
                "check the reading (zero the photometer on the solvent)"
                if absorbance < MIN_ABSORBANCE
                else "check the reading (a photometer reads at most about 3 to 4; a slipped "
                "decimal point?)",
                key,
            )
            continue
        candidates.append(Reading(row, section, bench, replicate, mixture, absorbance))
    readings = _without_repeats(candidates, rejections)
    if not readings:
        _error(
            1,
            "absorbance",
            f"no usable reading in {source}"
            + (
                f" ({len(rejections)} row(s) rejected, the first: {_first(rejections)})"
                if rejections
                else ""
            ),
            hint="fill in the absorbance column of readings-template.csv",
        )
    rejections.sort(key=lambda r: r.row)
    return ReadingsTable(tuple(readings), tuple(rejections), tuple(empty))


def _first(rejections: Sequence[Rejection]) -> str:
    first = min(rejections, key=lambda r: r.row)
    column = f", column {first.column}" if first.column else ""
    return f"row {first.row}{column}: {first.problem}"


def _listing(numbers: Sequence[int]) -> str:
    if numbers == list(range(numbers[0], numbers[-1] + 1)) and len(numbers) > 2:
        return f"{numbers[0]} to {numbers[-1]}"
    return ", ".join(str(n) for n in numbers)


def _without_repeats(candidates: list[Reading], rejections: list[Rejection]) -> list[Reading]:
    """Readings with each (section, bench, replicate, mixture) once; repeats rejected."""
    groups: dict[tuple[int, int, int, str], list[Reading]] = {}
    for reading in candidates:
        key = (reading.section, reading.bench, reading.replicate, reading.mixture)
        groups.setdefault(key, []).append(reading)
    kept: list[Reading] = []
    for group in groups.values():
        first = group[0]
        if len(group) == 1:
            kept.append(first)
            continue
        rows = ", ".join(str(r.row) for r in group)
        if all(r.absorbance == first.absorbance for r in group):
            kept.append(first)
            for repeat in group[1:]:
                rejections.append(
                    Rejection(
                        repeat.row,
                        "",
                        f"{first.mixture}",
                        f"repeats row {first.row} (same reading); the first is kept",
                        "give each mixture of each bench one row",
                        (first.section, first.bench, first.replicate),
                    )
                )
            continue
        for reading in group:
            rejections.append(
                Rejection(
                    reading.row,
                    "absorbance",
                    repr(reading.absorbance),
                    f"{first.mixture} of section {first.section}, bench {first.bench}, "
                    f"replicate {first.replicate} is given different readings in rows {rows}; "
                    "none is used",
                    "keep the one reading that is right",
                    (first.section, first.bench, first.replicate),
                )
            )
    kept.sort(key=lambda r: r.row)
    return kept
