"""Command line: parse arguments, call the API, map errors to exit codes.

Exit codes: 0 every check passes, 1 some check failed, 2 invalid input, 3 internal error.
Heavy libraries are imported inside the commands so start-up stays fast.
"""

from __future__ import annotations

import enum
import sys
import traceback
from collections.abc import Callable
from typing import Annotated, TypeVar

import typer

from planner.errors import PlannerError

__all__ = ["app", "main"]

T = TypeVar("T")

EXIT_OK = 0
EXIT_CHECK_FAILED = 1
EXIT_INVALID_INPUT = 2
EXIT_INTERNAL = 3


class OutputFormat(enum.StrEnum):
    """Output format of a command."""

    text = "text"
    json = "json"


app = typer.Typer(
    name="planner",
    help=(
        "Plan spectrophotometric equilibrium-constant experiments: exact equilibria, recipes "
        "the shelf can deliver, predicted results, pipetting sheets and answer keys."
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


def _run(action: Callable[[], T]) -> T:
    """Run a command body; project errors exit 2 with a message, anything else exits 3."""
    try:
        return action()
    except PlannerError as error:
        from rich.console import Console
        from rich.markup import escape

        console = Console(stderr=True, highlight=False)
        console.print(f"[bold red]error:[/] {escape(str(error))}")
        raise typer.Exit(EXIT_INVALID_INPUT) from None
    except (typer.Exit, typer.Abort, KeyboardInterrupt):
        raise
    except Exception:
        sys.stderr.write(
            "internal error (a bug in planner; please report it with the input that caused it):\n"
        )
        sys.stderr.write("".join(traceback.format_exc()))
        raise typer.Exit(EXIT_INTERNAL) from None


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
        float, typer.Option("--k", help="Formation constant K of the 1:1 complex [L/mol].")
    ],
    excess: Annotated[
        float,
        typer.Option("--excess", help="Total concentration of the reagent in excess [mol/L]."),
    ],
    limiting: Annotated[
        float,
        typer.Option("--limiting", help="Total concentration of the limiting reagent [mol/L]."),
    ],
    tolerance: Annotated[
        float,
        typer.Option(
            "--tolerance",
            help="Accepted relative error of the all-bound assumption, e.g. 0.02 for 2 %.",
        ),
    ] = 0.01,
    output_format: Annotated[
        OutputFormat, typer.Option("--format", help="text for people, json for programs.")
    ] = OutputFormat.text,
) -> None:
    """Is an excess large enough to treat the limiting reagent as fully bound?

    Solves the 1:1 equilibrium exactly and reports the bound fraction of the limiting reagent,
    the relative error of the assumption, and the smallest total excess that meets the
    tolerance. Exit status 1 when the excess is insufficient.
    """

    def body() -> int:
        from planner.chem.assumption import check_assumption

        result = check_assumption(k, excess, limiting, tolerance)
        if output_format is OutputFormat.json:
            from planner.report.check_text import check_document
            from planner.report.jsonout import dumps

            _write_stdout(dumps(check_document(result)))
        else:
            from rich.console import Console

            from planner.report.check_text import render_check

            Console(highlight=False).print(render_check(result))
        return EXIT_OK if result.verdict == "ok" else EXIT_CHECK_FAILED

    code = _run(body)
    if code:
        raise typer.Exit(code)


def main() -> None:
    """Console-script entry point."""
    app()
