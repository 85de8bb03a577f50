"""A file's text: a regular file, of bounded size, UTF-8, or a project error naming the path."""

from __future__ import annotations

import os
import stat
from typing import NoReturn

from planner.errors import PlanFileError, PlannerError, ReadingsFileError, ResultFileError
from planner.records import record

__all__ = [
    "MAX_PLAN_FILE_BYTES",
    "MAX_READINGS_FILE_BYTES",
    "MAX_RESULT_FILE_BYTES",
    "PLAN_FILE",
    "PLAN_RESULT",
    "READINGS_FILE",
    "FileKind",
    "read_text",
]

#: Largest plan file read [bytes], 1 MiB. A plan file is a few kilobytes (the embedded default
#: is about 2 kB, and 40 devices, 12 stocks and 30 species stay below 20 kB); reading stops
#: here, so a wrong path (a disk image, /dev/zero) cannot exhaust memory.
MAX_PLAN_FILE_BYTES = 2**20
#: Largest saved plan result (plan.json) read by planner verify [bytes], 8 MiB. A result holds
#: the plan's inputs plus every mixture with its concentrations: about 20 kB for the default,
#: under 1 MB for 210 mixtures of 12 stocks, and it repeats the plan file's text (its title
#: twice), so its limit is larger than a plan file's.
MAX_RESULT_FILE_BYTES = 8 * 2**20

#: Largest readings file (CSV) read by planner analyse [bytes], 8 MiB. A row is about 20
#: bytes: the largest session (100 sections, tens of benches, replicates, some twenty
#: mixtures) is a few megabytes, a class of 30 benches about 7 kB.
MAX_READINGS_FILE_BYTES = 8 * 2**20


@record
class FileKind:
    """A kind of file the planner reads: how messages name it, its error, its size limit.

    Attributes
    ----------
    what
        The name in messages, e.g. ``"plan file"``.
    error
        The error raised for it (a subclass of :class:`~planner.errors.PlannerError`).
    limit
        The largest size read [bytes].
    typical
        Its usual size in words, for the hint of a file that is too large.
    """

    what: str
    error: type[PlannerError]
    limit: int
    typical: str


#: A TOML plan file (planner plan, simulate, variants).
PLAN_FILE = FileKind("plan file", PlanFileError, MAX_PLAN_FILE_BYTES, "a few kilobytes")
#: A saved plan result, plan.json (planner verify).
PLAN_RESULT = FileKind(
    "plan result", ResultFileError, MAX_RESULT_FILE_BYTES, "tens to hundreds of kilobytes"
)

#: A class's readings, CSV (planner analyse).
READINGS_FILE = FileKind(
    "readings file", ReadingsFileError, MAX_READINGS_FILE_BYTES, "a few to hundreds of kilobytes"
)


def read_text(name: str, kind: FileKind) -> str:
    """A UTF-8 text file (byte-order mark allowed), or ``kind.error`` naming the path.

    Only a regular file is read, and only up to ``kind.limit`` bytes: a FIFO blocked forever,
    ``/dev/zero`` was read until memory ran out, and a directory gave an operating-system
    message.

    Parameters
    ----------
    name
        The path, as the user gave it (quoted in messages).
    kind
        What the file is: :data:`PLAN_FILE`, :data:`PLAN_RESULT` or :data:`READINGS_FILE`.

    Returns
    -------
    str
        The file's text, without a leading byte-order mark.

    Raises
    ------
    PlannerError
        Of class ``kind.error``: the file cannot be opened, is not a regular file, is larger
        than ``kind.limit`` or is not UTF-8.
    """
    try:
        # stat first, so that a FIFO is never opened (opening one for reading waits for a
        # writer); O_NONBLOCK keeps a FIFO swapped in after the stat from blocking, and the
        # fstat of the open file is the check that counts.
        _check_regular(os.stat(name), name, kind)
        flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
        descriptor = os.open(name, flags)
        try:
            _check_regular(os.fstat(descriptor), name, kind)
            with os.fdopen(descriptor, "rb", closefd=False) as handle:
                raw = handle.read(kind.limit + 1)  # one byte more tells a file that grew
        finally:
            os.close(descriptor)
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise kind.error(
            f"cannot read the {kind.what} {name} ({reason})",
            hint="check the path and that the file is readable",
        ) from None
    if len(raw) > kind.limit:
        _too_large(name, kind)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise kind.error(
            f"the {kind.what} {name} is not UTF-8 text (bad byte at offset {exc.start})",
            hint="save the file as UTF-8",
        ) from None


_NOT_REGULAR = (
    (stat.S_ISDIR, "a directory"),
    (stat.S_ISFIFO, "a FIFO (named pipe)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)


def _check_regular(status: os.stat_result, name: str, kind: FileKind) -> None:
    mode = status.st_mode
    if not stat.S_ISREG(mode):
        found = next((text for test, text in _NOT_REGULAR if test(mode)), "not a regular file")
        raise kind.error(
            f"cannot read the {kind.what} {name}: it is {found}, not a regular file",
            hint=f"give the path of the {kind.what} itself (a file of at most {_size(kind)})",
        )
    if status.st_size > kind.limit:
        _too_large(name, kind)


def _size(kind: FileKind) -> str:
    return f"{kind.limit // 2**20} MiB"


def _too_large(name: str, kind: FileKind) -> NoReturn:
    raise kind.error(
        f"the {kind.what} {name} is larger than {_size(kind)}, the most the planner reads",
        hint=f"check the path: a {kind.what} is {kind.typical}",
    )
