"""Command line: parse arguments, call the API, map errors to exit codes.

Exit codes: 0 every check passes, 1 some check failed, 2 invalid input, 3 internal error;
128 + the signal's number (130, 143) when stopped by SIGINT or SIGTERM.
Heavy libraries are imported inside the commands so start-up stays fast.
"""

from __future__ import annotations

import enum
import inspect
import os
import signal
import sys
import threading
import traceback
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from planner.errors import PlannerError

if TYPE_CHECKING:
    from rich.console import Console

    from planner.inputs import PlanInputs
    from planner.result import Check, Plan

__all__ = ["app", "main"]

EXIT_OK = 0
EXIT_CHECK_FAILED = 1
EXIT_INVALID_INPUT = 2
EXIT_INTERNAL = 3
#: Help of --force, the same for every command that writes a folder.
_FORCE_HELP = (
    "Replace an --out folder that the planner wrote before (it holds a .planner-output file "
    "listing its files). Never replaces a folder the planner did not write, one holding other "
    "files, the current or home folder, the file-system root, or a folder holding them or "
    "the plan file."
)

#: Most trials of planner simulate: 1e7 take minutes and about 2 GiB for the default plan
#: (the Monte Carlo also refuses trials x mixtures beyond its memory budget). Equal to
#: planner.predict.montecarlo.MAX_TRIALS, kept here so the command line starts without
#: scipy (tests/test_simulate.py checks they agree).
_MAX_TRIALS = 10_000_000
#: Most sections of planner variants: 100 take about 20 s and 30 MB of sheets. Equal to
#: planner.design.variants.MAX_SECTIONS (tests/design/test_variants.py checks).
_MAX_SECTIONS = 100
#: Largest --seed: seeds are whole numbers from 0 to 2**32 - 1, the range numpy's legacy
#: seeding and most tools accept (common practice); numpy's Generator refuses negative ones.
_MAX_SEED = 2**32 - 1


class Technique(enum.StrEnum):
    """Bench presets of ``[bench]`` (planner.lab.bench.PRESETS)."""

    calibrated = "calibrated"
    practised = "practised"
    novice = "novice"


class OutputFormat(enum.StrEnum):
    """Output format of a command."""

    text = "text"
    json = "json"


# Options several commands share, each declared once.
_FormatOption = Annotated[
    OutputFormat, typer.Option("--format", help="text for people, json for programs.")
]
_ForceOption = Annotated[bool, typer.Option("--force", help=_FORCE_HELP)]
_DateOption = Annotated[
    str | None,
    typer.Option(
        "--date", help="Date printed on the sheets (default: today), an ISO date YYYY-MM-DD."
    ),
]


def _seed_option(help_text: str) -> Any:
    """The --seed option, 0 to 2**32 - 1, with the command's own help."""
    return typer.Option("--seed", min=0, max=_MAX_SEED, help=help_text)


_QuietOption = Annotated[
    bool, typer.Option("--quiet", "-q", help="Print nothing but errors; the exit status tells.")
]


app = typer.Typer(
    name="planner",
    help=(
        "Plan spectrophotometric equilibrium-constant experiments: exact equilibria, recipes "
        "the shelf can deliver, predicted results, pipetting sheets and answer keys.\n\n"
        "Exit status: 0 all checks pass, 1 a check failed, 2 the input could not be used, "
        "3 an internal error (a bug: please report it)."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode="rich",
    context_settings={"help_option_names": ["-h", "--help"]},
)


@app.callback()
def _root() -> None:
    """Plan spectrophotometric equilibrium-constant experiments.

    Exit status: 0 all checks pass, 1 a check failed, 2 the input could not be used,
    3 an internal error (a bug: please report it).
    """
    _safe_streams()


def _safe_streams() -> None:
    """Never fail on a character the output's encoding cannot hold.

    Reports carry µ, ×, ± and whatever a plan file names; with PYTHONIOENCODING=ascii or a
    Latin-1 terminal, writing them raised UnicodeEncodeError (an internal error, found by
    testing under such locales). Such characters are written as backslash escapes (``\\xd7``)
    instead; the JSON documents are ASCII already. The streams keep their encoding, so a UTF-8
    terminal shows every character as it is.
    """
    for stream in (sys.stdout, sys.stderr):
        reconfigure = getattr(stream, "reconfigure", None)
        if reconfigure is not None:
            reconfigure(errors="backslashreplace")


@contextmanager
def _options(names: Mapping[str, str]) -> Iterator[None]:
    """An error about a core argument names the command-line option it came from."""
    try:
        yield
    except PlannerError as error:
        if error.field in names:
            raise error.renamed(names[error.field]) from None
        raise


def _sheet_date(date: str | None) -> str:
    """The --date of the sheets, an ISO date (YYYY-MM-DD, a real date), or today."""
    import datetime
    import re

    from planner.errors import InvalidInputError

    if date is None:
        return _today()
    hint = "give a real calendar date as YYYY-MM-DD, e.g. 2026-09-14, or leave --date out"
    # fromisoformat alone would also take 20260914 and 2026-W38-1.
    if not re.fullmatch(r"[0-9]{4}-[0-9]{2}-[0-9]{2}", date):
        raise InvalidInputError("not an ISO date YYYY-MM-DD", field="--date", value=date, hint=hint)
    try:
        return datetime.date.fromisoformat(date).isoformat()
    except ValueError:
        raise InvalidInputError(
            "no such day in the calendar", field="--date", value=date, hint=hint
        ) from None


class _Stopped(KeyboardInterrupt):
    """SIGTERM or SIGINT, raised where the command is, so that every ``finally`` and ``with``
    on the way out runs: Chromium's process group is killed, temporary folders are removed,
    and an output folder being written is left as it was."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


@contextmanager
def _signals_stop_the_command() -> Iterator[None]:
    """Turn SIGTERM and SIGINT into :class:`_Stopped` for the duration of a command body.

    The first signal raises; later ones are ignored, so the clean-up it starts is not cut
    short. Signals that were ignored when the planner started (``nohup``) stay ignored.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous: dict[signal.Signals, Any] = {}

    def stop(signum: int, frame: object) -> None:
        for caught in previous:
            signal.signal(caught, signal.SIG_IGN)
        raise _Stopped(signum)

    for number in (signal.SIGTERM, signal.SIGINT):
        if signal.getsignal(number) is not signal.SIG_IGN:
            previous[number] = signal.signal(number, stop)
    try:
        yield
    finally:
        for number, handler in previous.items():
            # None: a handler set outside Python, which cannot be put back; the default then.
            signal.signal(number, signal.SIG_DFL if handler is None else handler)


def _run(action: Callable[[], int]) -> None:
    """Run a command body and exit with the status it returns (0 returns normally); project
    errors exit 2 with a message, anything else exits 3.

    SIGTERM and Ctrl-C stop it cleanly (see :func:`_signals_stop_the_command`), with a one-line
    message and the shell's status for a signal, 128 + its number (130 for Ctrl-C, 143 for
    SIGTERM).
    """
    try:
        with _signals_stop_the_command():
            code = action()
    except PlannerError as error:
        from rich.console import Console
        from rich.text import Text

        console = Console(stderr=True, highlight=False)
        # Text, not markup: an error quotes the user's values, which may hold "[...]" or ":x:".
        console.print(Text.assemble(("error:", "bold red"), " ", str(error)))
        raise typer.Exit(EXIT_INVALID_INPUT) from None
    except KeyboardInterrupt as stop:
        signum = stop.signum if isinstance(stop, _Stopped) else int(signal.SIGINT)
        sys.stderr.write(
            f"planner: stopped by {signal.Signals(signum).name}; temporary files removed, "
            "any --out folder left whole (old or new)\n"
        )
        raise typer.Exit(128 + signum) from None
    except (typer.Exit, typer.Abort):
        raise
    except Exception:
        sys.stderr.write(
            "internal error (a bug in planner; please report it with the input that caused it):\n"
        )
        sys.stderr.write("".join(traceback.format_exc()))
        raise typer.Exit(EXIT_INTERNAL) from None
    if code:
        raise typer.Exit(code)


def _write_stdout(text: str) -> None:
    sys.stdout.write(text)
    sys.stdout.flush()


@app.command(
    epilog=(
        "Examples:\n\n"
        "  planner check --k 98 --excess 0.1 --limiting 1.5e-4 --tolerance 0.02\n\n"
        "  planner check --k 1e4 --excess 0.01 --limiting 2e-4 --format json"
    )
)
def check(
    k: Annotated[
        float,
        typer.Option("--k", help="Formation constant K of the 1:1 complex [L/mol], 1e-60 to 1e60."),
    ],
    excess: Annotated[
        float,
        typer.Option(
            "--excess", help="Total concentration of the reagent in excess \\[mol/L], 0 to 20."
        ),
    ],
    limiting: Annotated[
        float,
        typer.Option(
            "--limiting",
            help="Total concentration of the limiting reagent \\[mol/L], 1e-30 to 20.",
        ),
    ],
    tolerance: Annotated[
        float,
        typer.Option(
            "--tolerance",
            help="Accepted relative error of the all-bound assumption, e.g. 0.02 for 2 % "
            "(1e-6 to below 1).",
        ),
    ] = 0.02,
    output_format: _FormatOption = OutputFormat.text,
) -> None:
    """Is an excess large enough to treat the limiting reagent as fully bound?

    Solves the 1:1 equilibrium exactly and reports the bound fraction of the limiting reagent,
    the relative error of the assumption, and the smallest total excess that meets the
    tolerance, rounded up and checked again; above 10 mol/L it says no excess fixes it. Exit
    status 1 when the excess is insufficient, 2 for a value outside the accepted ranges: K
    from 1e-60 to 1e60 L/mol, excess from 0 to 20 mol/L, limiting from 1e-30 to 20 mol/L
    (20 mol/L: the most a stock may hold), tolerance from 1e-6 to below 1 (nan and inf are
    refused).
    """

    def body() -> int:
        from planner.chem.assumption import check_assumption

        names = {"K": "--k", "excess": "--excess", "limiting": "--limiting"}
        with _options({**names, "tolerance": "--tolerance"}):
            result = check_assumption(k, excess, limiting, tolerance)
        if output_format is OutputFormat.json:
            from planner.report.check_text import check_document
            from planner.report.jsonout import dumps

            _write_stdout(dumps(check_document(result)))
        else:
            from planner.report.check_text import render_check

            _print(render_check(result))
        return EXIT_OK if result.verdict == "ok" else EXIT_CHECK_FAILED

    _run(body)


def _load(file: Path | None) -> PlanInputs:
    from planner.planfile import load_plan, parse_plan

    if file is None:
        from importlib.resources import files

        text = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")
        return parse_plan(text, source="the embedded default plan")
    return load_plan(file)


def _reads(file: Path | None) -> tuple[Path, ...]:
    """The files a command reads, which its output folder must never hold."""
    return () if file is None else (file,)


def _check_out(out: Path | None, *, force: bool, file: Path | None) -> None:
    """Refuse an unusable --out folder before the design, the simulation and the plots."""
    if out is not None:
        from planner.report.outdir import check_output_target

        check_output_target(out, force=force, protect=_reads(file))


def _today() -> str:
    import datetime

    return datetime.date.today().isoformat()


@app.command(
    epilog=(
        "Examples:\n\n"
        "  planner plan                      plan the embedded default scenario\n\n"
        "  planner plan recipes/iron-thiocyanate-flasks.toml --out sheets/\n\n"
        "  planner plan my-plan.toml --out sheets/ --no-plots   sheets only, no figures\n\n"
        "  planner plan my-plan.toml --format json > plan.json"
    )
)
def plan(
    file: Annotated[
        Path | None,
        typer.Argument(
            help="Plan file (TOML, a regular file of at most 1 MiB). Omit it to plan the "
            "embedded default scenario."
        ),
    ] = None,
    out: Annotated[
        Path | None,
        typer.Option(
            "--out",
            help="Folder for plan.json, bench sheets, prep sheet, answer key, CSV and plots "
            "(plots/*.svg).",
        ),
    ] = None,
    output_format: _FormatOption = OutputFormat.text,
    force: _ForceOption = False,
    date: _DateOption = None,
    pdf: Annotated[
        bool,
        typer.Option(
            "--pdf", help="Also print the sheets to PDF with headless Chromium (needs --out)."
        ),
    ] = False,
    plots: Annotated[
        bool,
        typer.Option(
            "--plots/--no-plots",
            help="Draw the answer key's figures into plots/ (with --out); --no-plots writes "
            "the sheets without them.",
        ),
    ] = True,
    quiet: _QuietOption = False,
) -> None:
    """Design the standards and test mixtures from what is on the shelf, verified.

    Solves every deliverable mixture exactly, chooses a reagent blank, standards spread across
    the absorbance window and test mixtures informative about K, totals the stocks, and checks
    the result from first principles. Exit status 1 when a check fails (the report still
    prints, failures first), 2 when the plan file cannot be read.
    """

    def body() -> int:
        from planner.pipeline import design_plan

        sheet_date = _sheet_date(date)
        if pdf and out is None:
            from planner.errors import InvalidInputError

            raise InvalidInputError(
                "--pdf writes PDF files and needs a folder", field="--pdf", hint="add --out DIR"
            )
        inputs = _load(file)
        _check_out(out, force=force, file=file)  # before the long work
        result = design_plan(inputs)
        if out is not None:
            from planner.report.outdir import plan_files, write_output_folder

            sheet_date = date or _today()
            files = plan_files(result, date=sheet_date, plots=plots)
            if pdf:
                from planner.report.browser import pdfs_for

                files.update(pdfs_for(files, date=sheet_date))
            write_output_folder(out, files, force=force, protect=_reads(file))
        if quiet:
            pass
        elif output_format is OutputFormat.json:
            from planner.report.plan_json import plan_json

            _write_stdout(plan_json(result))
        else:
            from planner.report.terminal import render_plan

            _print(render_plan(result))
        _tell_written(out, quiet=quiet)
        return EXIT_CHECK_FAILED if result.failed else EXIT_OK

    _run(body)


def _render_checks(checks: tuple[Check, ...]) -> None:
    from planner.report.terminal import render_checks

    _print(render_checks(checks))


def _print(renderable: object) -> None:
    """A rendered result on stdout (rich is imported only when something is printed)."""
    from rich.console import Console

    Console(highlight=False).print(renderable)


def _tell_written(out: Path | None, *, quiet: bool) -> None:
    """Say on stderr which folder a command wrote, unless asked to be quiet."""
    if out is not None and not quiet:
        _tell(f"wrote {out}/")


def _tell(message: str, *, heading: str = "", style: str = "") -> None:
    """One line on stderr, printed literally (paths and reasons may hold rich markup)."""
    from rich.console import Console
    from rich.text import Text

    line = Text.assemble((heading, style), " ", message) if heading else Text(message)
    Console(stderr=True, highlight=False).print(line)


@app.command(
    epilog=(
        "Examples:\n\n"
        "  planner verify sheets/plan.json\n\n"
        "  planner verify edited-plan.json --format json"
    )
)
def verify(
    result_file: Annotated[
        Path,
        typer.Argument(
            help="A saved plan result (plan.json, at most 8 MiB), perhaps edited by hand."
        ),
    ],
    output_format: _FormatOption = OutputFormat.text,
    quiet: _QuietOption = False,
) -> None:
    """Re-check a saved plan result from first principles.

    Re-mixes every recipe from its additions, re-solves the equilibria, re-reads the
    absorbances, checks every volume against the devices named and the shelf, and recomputes
    the totals. Exit status 1 on any failed check.
    """

    def body() -> int:
        from planner.resultfile import load_result
        from planner.verify import verify_saved

        checks = verify_saved(load_result(result_file))
        if quiet:
            pass
        elif output_format is OutputFormat.json:
            from planner.report.verify_json import verify_json

            _write_stdout(verify_json(checks, file=str(result_file)))
        else:
            _render_checks(checks)
        return EXIT_CHECK_FAILED if any(c.status == "fail" for c in checks) else EXIT_OK

    _run(body)


@app.command(epilog="Examples:\n\n  planner init\n\n  planner init lab-week-3.toml")
def init(
    path: Annotated[Path, typer.Argument(help="Where to write the starter plan file.")] = Path(
        "plan.toml"
    ),
) -> None:
    """Write a commented starter plan file (never overwrites an existing file).

    The file appears whole or not at all (written beside, flushed to disk, then named), so a
    full disk or an interrupt leaves no empty or partial file.
    """

    def body() -> int:
        from importlib.resources import files

        from planner.report.outdir import write_new_file

        text = files("planner").joinpath("data/starter.toml").read_text(encoding="utf-8")
        write_new_file(path, text.encode("utf-8"))

        _tell(f"wrote {path}; edit it, then run: planner plan {path}")
        return EXIT_OK

    _run(body)


@app.command(
    epilog=(
        "Examples:\n\n"
        "  planner variants recipes/iron-thiocyanate-flasks.toml --sections 6 --seed 1 "
        "--out week3/\n\n"
        "  planner variants my-plan.toml --sections 30 --seed 2026 --out variants/ --force"
    )
)
def variants(
    file: Annotated[
        Path,
        typer.Argument(
            help="Plan file (TOML, a regular file of at most 1 MiB); its session is one section."
        ),
    ],
    sections: Annotated[
        int,
        typer.Option(
            "--sections",
            min=1,
            max=_MAX_SECTIONS,
            help=f"Number of sections, 1 to {_MAX_SECTIONS}.",
        ),
    ],
    seed: Annotated[
        int, _seed_option(f"Seed, 0 to {_MAX_SEED}; the same seed gives the same sets.")
    ],
    out: Annotated[Path, typer.Option("--out", help="Folder for the section folders.")],
    force: _ForceOption = False,
    date: _DateOption = None,
    quiet: _QuietOption = False,
) -> None:
    """Distinct, verified recipe sets of equal difficulty, one per section.

    Rule: no test-mixture recipe appears in two sections whenever the shelf allows it
    (standards may be shared); every section's plan passes verification; the predicted u(K)/K
    of any two sections is within 20 % of each other. Says how many sections with distinct
    test sets the shelf allows and warns (section-distinctness) when sections must share a
    test recipe. Writes DIR/section-NN/ (bench sheets, answer key, plan.json) and an index with
    the combined stock totals. Exit status 1 when the shelf cannot give that many different
    sets at all, or the whole session runs short of stock (the reason says what would help).
    """

    def body() -> int:
        import numpy as np
        from rich.console import Console
        from rich.progress import Progress

        from planner.design.variants import DISTINCTNESS_CHECK
        from planner.pipeline import design_variants
        from planner.report.outdir import write_output_folder
        from planner.report.variants_index import variants_files

        sheet_date = _sheet_date(date)
        inputs = _load(file)
        _check_out(out, force=force, file=file)  # before the design
        err = Console(stderr=True, highlight=False, quiet=quiet)
        with (
            _options({"sections": "--sections"}),
            Progress(console=err, transient=True, disable=quiet) as progress,
        ):
            task = progress.add_task("designing sections", total=sections)
            found = design_variants(
                inputs,
                sections,
                np.random.default_rng(seed),
                progress=lambda done, total: progress.update(task, completed=done),
            )
        if not found.plans or found.combined is None:
            _tell(found.reason, heading="no variants:", style="bold red")
            return EXIT_CHECK_FAILED
        write_output_folder(
            out,
            variants_files(found.plans, combined=found.combined, date=sheet_date, seed=seed),
            force=force,
            protect=_reads(file),
        )
        if not quiet:
            _tell(f"wrote {len(found.plans)} section folder(s) and an index to {out}/")
        session_failed = [c for c in found.combined.checks if c.status == "fail"]
        for check in session_failed:
            # Each section may pass while the session as a whole does not (stock too short).
            _tell(check.detail, heading=f"{check.name}:", style="bold red")
        for check in found.combined.checks:
            # How many sections the shelf allows with test recipes of their own.
            if check.name == DISTINCTNESS_CHECK and (check.status != "pass" or not quiet):
                style = "bold yellow" if check.status == "warn" else ""
                _tell(check.detail, heading=f"{check.name}:", style=style)
        if not found.complete:
            _tell(found.reason, heading=f"only {len(found.plans)} of {sections}:", style="bold red")
            return EXIT_CHECK_FAILED
        return EXIT_CHECK_FAILED if session_failed else EXIT_OK

    _run(body)


@app.command(
    epilog=(
        "Examples:\n\n"
        "  planner analyse readings.csv --plan sheets/\n\n"
        "  planner analyse readings.csv --plan week3/ --format json > analysis.json\n\n"
        "  planner analyse readings.csv --plan sheets/ --out marked/"
    )
)
def analyse(
    readings_file: Annotated[
        Path,
        typer.Argument(
            help="The class's readings (CSV: section,bench,replicate,mixture,absorbance, as "
            "readings-template.csv; at most 8 MiB)."
        ),
    ],
    plan_folder: Annotated[
        Path,
        typer.Option(
            "--plan",
            help="The folder planner plan --out wrote (plan.json), or planner variants --out "
            "(section-NN/plan.json: each section against its own plan).",
        ),
    ],
    output_format: _FormatOption = OutputFormat.text,
    out: Annotated[
        Path | None,
        typer.Option(
            "--out",
            help="Folder for the report (analysis.html), analysis.json and a CSV per bench.",
        ),
    ] = None,
    force: _ForceOption = False,
    quiet: _QuietOption = False,
) -> None:
    """Read a class's readings back against the plan: which benches went wrong, and how.

    Analyses every bench by the all-bound analysis and by the global fit, compares it with
    its section's answer key and flags what is off, each flag with its likely cause and the
    evidence; then the class: K by both analyses against the prediction, and one global fit
    of every reading of the benches that are ok. Rows that cannot be used are listed, never
    dropped, and a bench whose rows were all rejected or never given is named. Exit status 0
    when every bench is ok, 1 when any is flagged or had every row rejected, 2 when the
    files cannot be used.
    """

    def body() -> int:
        from planner.readings.analyse import analyse_class
        from planner.readings.files import load_plans, load_readings

        plans = load_plans(plan_folder)
        table = load_readings(readings_file, plans)
        _check_out(out, force=force, file=readings_file)
        result = analyse_class(plans, table)
        if out is not None:
            from planner.report.analyse_html import analysis_files
            from planner.report.outdir import write_output_folder

            files = analysis_files(result, readings=str(readings_file), plan=str(plan_folder))
            write_output_folder(out, files, force=force, protect=(readings_file,))
        if quiet:
            pass
        elif output_format is OutputFormat.json:
            from planner.report.analyse_json import analysis_json

            _write_stdout(analysis_json(result, readings=str(readings_file), plan=str(plan_folder)))
        else:
            from planner.report.analyse_text import render_analysis

            _print(render_analysis(result))
        _tell_written(out, quiet=quiet)
        return EXIT_CHECK_FAILED if result.flagged else EXIT_OK

    _run(body)


#: Trials from which the simulate command shows a progress bar on stderr.
_PROGRESS_FROM_TRIALS = 20_000


@app.command(
    epilog=(
        "Examples:\n\n"
        "  planner simulate                           the embedded default scenario\n\n"
        "  planner simulate recipes/micro-piston.toml --trials 200000 --seed 7\n\n"
        "  planner simulate my-plan.toml --format json > simulation.json\n\n"
        "  planner simulate my-plan.toml --out sim/   writes the K and eps histograms (PNG, "
        "SVG) and simulation.json"
    )
)
def simulate(
    file: Annotated[
        Path | None,
        typer.Argument(
            help="Plan file (TOML, a regular file of at most 1 MiB). Omit it to simulate the "
            "embedded default plan."
        ),
    ] = None,
    trials: Annotated[
        int,
        typer.Option(
            "--trials",
            min=2,
            max=_MAX_TRIALS,
            help=f"Benches to simulate, 2 to {_MAX_TRIALS} (1e5 take about a second or two); "
            "the simulation may use 2 GiB of memory, so plans with many mixtures allow fewer.",
        ),
    ] = 100_000,
    seed: Annotated[
        int, _seed_option(f"Seed, 0 to {_MAX_SEED}; the same seed gives exactly the same results.")
    ] = 0,
    output_format: _FormatOption = OutputFormat.text,
    out: Annotated[
        Path | None,
        typer.Option(
            "--out",
            help="Folder for simulation.json and the histograms K-histogram and "
            "epsilon-histogram (.svg).",
        ),
    ] = None,
    force: _ForceOption = False,
    quiet: _QuietOption = False,
    technique: Annotated[
        list[Technique] | None,
        typer.Option(
            "--technique",
            help="Compare bench presets side by side on the same recipes (repeat the option: "
            "--technique calibrated --technique novice); with --out, a histogram of K per "
            "preset (K-histogram-by-technique).",
        ),
    ] = None,
) -> None:
    """Run the plan as a virtual class: what the benches will measure, and how spread out.

    Designs the plan, then simulates TRIALS benches making it, each with its own stock
    batches, glassware errors and reading noise, and analyses every bench two ways: the
    all-bound analysis (limiting reagent assumed fully bound in the standards) and the global
    fit (eps and K fitted together with the full equilibrium model). Prints mean, SD and 95 %
    interval of eps and K per analysis, the bias of the all-bound K, and the first-order
    uncertainty budget. Exit status 1 when the plan itself fails a check (the simulation still
    runs), 2 on invalid input.
    """

    def body() -> int:
        import numpy as np
        from rich.console import Console
        from rich.progress import Progress

        from planner.pipeline import design_plan
        from planner.predict.montecarlo import simulate as run_virtual_class
        from planner.predict.uncertainty import propagate

        inputs = _load(file)
        _check_out(out, force=force, file=file)  # before the long work
        designed = design_plan(inputs)
        if technique:
            return _compare_techniques(designed, [t.value for t in technique], trials, seed)
        # The pipeline's prediction, run once; a plan it could not analyse gets the budget's
        # own error (what is missing) from propagate.
        gum = designed.uncertainty or propagate(designed.inputs, designed.mixtures)
        err = Console(stderr=True, highlight=False, quiet=quiet)
        if designed.failed:
            err.print("[bold red]note:[/] the plan fails a check; run planner plan for details")
        show = not quiet and trials >= _PROGRESS_FROM_TRIALS
        with Progress(console=err, transient=True, disable=not show) as progress:
            task = progress.add_task("simulating benches", total=trials)
            with _options({"trials": "--trials"}):
                result = run_virtual_class(
                    designed.inputs,
                    designed.mixtures,
                    trials=trials,
                    rng=np.random.default_rng(seed),
                    progress=lambda done, total: progress.update(task, completed=done),
                )
        from planner.report.plots import simulation_plots
        from planner.report.simulation import meaningful_K, render_simulation, simulation_json

        # The all-bound numbers are withheld where the plan withholds them or where the class
        # gets no meaningful K from them (they would mean nothing); the analysis the plan is
        # designed for leads.
        analysis = designed.analysis
        all_bound = designed.prediction is not None and meaningful_K(result.all_bound.K)
        document = simulation_json(
            result, gum, title=inputs.title, seed=seed, analysis=analysis, all_bound=all_bound
        )

        def print_text(console: Console) -> None:
            # The coefficients' formulas need room; narrower terminals get them in the JSON.
            wide = console.width >= 140
            console.print(
                render_simulation(
                    result, gum, formulas=wide, analysis=analysis, all_bound=all_bound
                )
            )

        deliver("simulation.json", document, lambda: simulation_plots(result), print_text)
        return EXIT_CHECK_FAILED if designed.failed else EXIT_OK

    def _compare_techniques(designed: Plan, names: list[str], trials: int, seed: int) -> int:
        import dataclasses

        import numpy as np
        from rich.console import Console

        from planner.lab.bench import preset_bench
        from planner.predict.montecarlo import simulate as run_virtual_class
        from planner.report.plots import technique_plots
        from planner.report.simulation import render_techniques, shown_all_bound, technique_json

        if designed.failed:
            err = Console(stderr=True, highlight=False, quiet=quiet)
            err.print("[bold red]note:[/] the plan fails a check; run planner plan for details")

        results = {}
        with _options({"trials": "--trials"}):
            for name in dict.fromkeys(names):
                bench_inputs = dataclasses.replace(designed.inputs, bench=preset_bench(name))
                results[name] = run_virtual_class(
                    bench_inputs,
                    designed.mixtures,
                    trials=trials,
                    rng=np.random.default_rng(seed),
                )
        # The all-bound K is withheld where the plan withholds it or where a preset's class
        # gets no meaningful K from it; the analysis the plan is designed for leads.
        analysis, all_bound = designed.analysis, designed.prediction is not None
        document = technique_json(
            results, title=designed.inputs.title, seed=seed, analysis=analysis, all_bound=all_bound
        )
        deliver(
            "techniques.json",
            document,
            lambda: technique_plots(results, all_bound=shown_all_bound(results, all_bound)),
            lambda console: console.print(
                render_techniques(results, analysis=analysis, all_bound=all_bound)
            ),
        )
        return EXIT_CHECK_FAILED if designed.failed else EXIT_OK

    def deliver(
        name: str,
        document: str,
        plots: Callable[[], Mapping[str, bytes]],
        print_text: Callable[[Console], None],
    ) -> None:
        """Write the JSON document as ``name`` and the plots into --out, print the document
        (--format json) or the text ``print_text`` prints, and say where the folder went."""
        from rich.console import Console

        if out is not None:
            from planner.report.outdir import write_output_folder

            files: dict[str, str | bytes] = {name: document}
            files.update(plots())
            write_output_folder(out, files, force=force, protect=_reads(file))
        if quiet:
            pass
        elif output_format is OutputFormat.json:
            _write_stdout(document)
        else:
            print_text(Console(highlight=False))
        _tell_written(out, quiet=quiet)

    _run(body)


def _flowed(doc: str) -> str:
    """A docstring as help text: each paragraph one flowing line, so the terminal wraps it
    (the help renderer keeps single line breaks, which break lines mid-sentence)."""
    paragraphs = inspect.cleandoc(doc).split("\n\n")
    return "\n\n".join(
        p if p.startswith("\b") else " ".join(line.strip() for line in p.splitlines())
        for p in paragraphs
    )


for _command in app.registered_commands:
    if _command.help is None and _command.callback is not None and _command.callback.__doc__:
        _command.help = _flowed(_command.callback.__doc__)


# Thread pools of the BLAS and OpenMP libraries numpy may load. The planner's products are
# tiny (2x2 to 10x10 per mixture), so a threaded BLAS only costs: its threads start and spin
# while numpy loads, 0.1 s of CPU per run on a 2-core machine (measured with
# tests/benchmarks/plan_cli.py), and with the machine loaded it slowed the solver eightfold.
_ONE_THREAD = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def _one_blas_thread() -> None:
    """Ask for one BLAS thread unless the user chose a number (before numpy is imported)."""
    for variable in _ONE_THREAD:
        os.environ.setdefault(variable, "1")


# The cyclic garbage collector's default first threshold (700 allocations) made it run about
# 120 times in one `planner plan`, 0.03 s of CPU spent re-scanning the import-time objects of
# pydantic, typer and numpy (measured with gc.callbacks on the default plan). A run is short
# and its memory bounded, so the command line collects less often; the library API keeps the
# interpreter's defaults.
_GC_FIRST_THRESHOLD = 100_000


def _collect_less_often() -> None:
    """Raise the collector's first threshold for this short-lived process."""
    import gc

    _, second, third = gc.get_threshold()
    gc.set_threshold(_GC_FIRST_THRESHOLD, second, third)


def main() -> None:
    """Console-script entry point."""
    _collect_less_often()
    _one_blas_thread()
    _safe_streams()  # also for what is printed before a command runs (usage errors, help)
    app()
