"""The output folder of ``planner plan --out DIR``: what goes in it, and writing it safely.

:func:`plan_files` builds the folder's contents as text (and, on request, the plots as PNG and
SVG bytes under ``plots/``), keyed by relative file name;
:func:`write_output_folder` and :func:`write_new_file` are the one place in the report layer
that writes files. The folder is built whole beside the target and swapped in (one atomic
exchange where Linux offers it), so a reader never sees a half-written folder and a failure
leaves the previous folder as it was. Every output folder carries a marker file,
:data:`MARKER_NAME`, listing what the planner wrote; ``--force`` replaces only such a folder,
and never the current, home or root folder or a folder holding them or the plan file.

Bench sheets: every bench of a section makes the same recipes, so a sheet differs between
benches only in its header. Up to :data:`MAX_BENCH_FILES` benches in the whole session, each
bench gets its own numbered sheet (``benches/section-01-bench-01.md`` and ``.html``); beyond
that, one sheet per section with a blank for the bench number (``benches/section-01.md``),
to be copied for every bench, keeps the folder browsable. In both cases
``bench-sheets.html`` holds all those pages in one document, one per printed page.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import functools
import os
import platform
import secrets
import shutil
import sys
import tempfile
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path, PurePosixPath, PureWindowsPath

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
    readings_template_csv,
)
from planner.result import Plan

__all__ = [
    "MARKER_NAME",
    "MAX_BENCH_FILES",
    "bench_slots",
    "check_output_target",
    "plan_files",
    "write_new_file",
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


def plan_files(
    plan: Plan,
    *,
    date: str,
    section: int | None = None,
    of_sections: int | None = None,
    plots: bool = False,
) -> dict[str, str | bytes]:
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
        those that apply) into ``plots/<stem>.svg``, and show them on the answer key. Off by
        default.

    Returns
    -------
    dict
        Relative file name -> text (bytes for the plots): ``plan.json``, ``mixtures.csv``,
        ``readings-template.csv`` (one row per section, bench, replicate and mixture, for
        ``planner analyse``),
        ``prep-sheet.md`` and ``.html``, ``answer-key.md`` and ``.html``,
        ``bench-sheets.html`` (every pipetting sheet, one per page), ``plots/*.svg`` with
        ``plots``, and ``benches/section-NN-bench-NN.md`` and ``.html``
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
    files: dict[str, str | bytes] = {
        "plan.json": plan_json(plan),
        "mixtures.csv": mixtures_csv(plan),
        "readings-template.csv": readings_template_csv(
            [(number, plan) for number in sorted({slot.section for slot in slots})]
        ),
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
    files.update(figures)
    return files


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


#: The file every output folder of the planner carries: it says what wrote the folder and lists
#: the files the planner put there, so that ``--force`` replaces only a folder the planner
#: wrote, and only while it holds nothing else. No date in it: the same inputs give the same
#: bytes.
MARKER_NAME = ".planner-output"
_MARKER_HEADER = (
    "# Written by planner. planner --force replaces this folder only while it holds nothing "
    "but the files listed below."
)
#: Files a file manager leaves in any folder it shows (macOS Finder, Windows Explorer): not the
#: user's work, so they do not stop --force.
_FILE_MANAGER_LITTER = frozenset({".DS_Store", "Thumbs.db"})
_BACKUP_SUFFIX = ".planner-backup"


def _marker(contents: Mapping[PurePosixPath, bytes]) -> bytes:
    names = sorted(path.as_posix() for path in contents)
    return ("\n".join([_MARKER_HEADER, *names]) + "\n").encode("utf-8")


def _listing(folder: Path) -> frozenset[str] | None:
    """The files a planner output folder lists in its marker, or None when it has none."""
    marker = folder / MARKER_NAME
    try:
        if marker.is_symlink() or not marker.is_file():
            return None
        lines = marker.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return None
    if not lines or not lines[0].startswith("# Written by planner"):
        return None
    return frozenset(line for line in lines[1:] if line)


def _foreign(folder: Path, listed: frozenset[str]) -> list[str]:
    """Entries of a planner output folder that its marker does not list (the user's own)."""
    folders = {
        parent.as_posix()
        for name in listed
        for parent in PurePosixPath(name).parents
        if parent != PurePosixPath(".")
    }
    found: list[str] = []

    def walk(path: Path, prefix: str) -> None:
        with os.scandir(path) as entries:
            for entry in entries:
                name = prefix + entry.name
                if entry.is_dir(follow_symlinks=False):
                    if name in folders:
                        walk(Path(entry.path), name + "/")
                    else:
                        found.append(name + "/")
                elif not (
                    name == MARKER_NAME or name in listed or entry.name in _FILE_MANAGER_LITTER
                ):
                    found.append(name)

    walk(folder, "")
    return sorted(found)


def _identity(path: str | Path) -> tuple[int, int] | None:
    try:
        status = os.stat(path)
    except (OSError, ValueError):
        return None
    return (status.st_dev, status.st_ino)


def _guarded(protect: Sequence[Path]) -> dict[tuple[int, int], str]:
    """Folders that --out may never name, by (device, inode), each with the reason.

    The root of the file system, the current folder, the home folder and every folder that
    holds one of them or one of the ``protect`` files (the plan file): replacing any of them
    would delete the user's own files, marker or not.
    """
    guarded: dict[tuple[int, int], str] = {}

    def add(path: Path | str, itself: str | None, holder: str) -> None:
        for chain in (Path(os.path.realpath(path)), Path(os.path.abspath(path))):
            for depth, folder in enumerate([chain, *chain.parents]):
                key = _identity(folder)
                if key is None or key in guarded or (depth == 0 and itself is None):
                    continue
                guarded[key] = itself if depth == 0 and itself is not None else holder

    add(Path(os.sep), "the root of the file system", "the root of the file system")
    try:
        cwd: str | None = os.getcwd()
    except OSError:  # the current folder was deleted: nothing there left to protect
        cwd = None
    if cwd is not None:
        add(cwd, "the current folder", "a folder that holds the current folder")
        # The shell's name for it, which may run through symbolic links.
        logical = os.environ.get("PWD")
        if logical and os.path.isabs(logical) and _identity(logical) == _identity(cwd):
            add(logical, "the current folder", "a folder that holds the current folder")
    try:
        home: Path | None = Path.home()
    except (RuntimeError, KeyError):
        home = None
    if home is not None:
        add(home, "the home folder", "a folder that holds the home folder")
    for path in protect:
        add(path, None, f"a folder that holds the plan file {path}")
    return guarded


def _backup_path(target: Path) -> Path:
    return target.with_name(f".{target.name}{_BACKUP_SUFFIX}")


def _recover(target: Path) -> None:
    """Put back an output folder that an interrupted two-rename swap left beside its place.

    Only where renameat2's exchange is unavailable is a folder swapped with two renames; a
    kill between them leaves ``target`` missing and the old folder, marker and all, at
    ``.<name>.planner-backup`` beside it. The next run that finds it so renames it back.
    """
    if target.exists() or target.is_symlink():
        return
    backup = _backup_path(target)
    if backup.is_symlink() or not backup.is_dir() or _listing(backup) is None:
        return
    try:
        os.rename(backup, target)
    except OSError as error:
        raise _refuse(
            target,
            f"the previous output folder is at {backup} (a run was interrupted while replacing "
            f"it) and could not be put back: {error.strerror or error}",
            f"rename {backup.name} back to {target.name} by hand",
        ) from error


def _refuse(target: Path, problem: str, hint: str) -> OutputError:
    return OutputError(problem, field="--out", value=str(target), hint=hint)


def _check_target(given: Path, target: Path, *, force: bool, protect: Sequence[Path] = ()) -> None:
    """Refuse ``target`` (``given`` normalised) as an output folder, or return."""
    _recover(target)
    if not target.exists() and not target.is_symlink():
        return
    if target.is_symlink():
        raise _refuse(
            target,
            f"the output path {target} is a symbolic link",
            "name the folder it points to, or a new folder",
        )
    if not target.is_dir():
        raise _refuse(
            target,
            f"the output path {target} exists and is not a folder",
            "choose a folder name that is not taken by a file",
        )
    guarded = _guarded(protect)
    for candidate in (target, Path(os.path.realpath(given))):
        reason = guarded.get(_identity(candidate) or (-1, -1))
        if reason is not None:
            raise _refuse(
                target,
                f"the output folder {target} is {reason}; the planner replaces its output "
                "folder as a whole and never replaces that one",
                "name a new folder for the output, e.g. --out sheets",
            )
    if not any(target.iterdir()):
        return
    listed = _listing(target)
    if listed is None:
        raise _refuse(
            target,
            f"the output folder {target} exists, is not empty and was not written by the "
            f"planner (it has no {MARKER_NAME} file), so not even --force replaces it",
            "choose another folder, or move its files away yourself first",
        )
    if not force:
        raise _refuse(
            target,
            f"the output folder {target} exists and is not empty",
            "pass --force to replace it, or choose another folder",
        )
    foreign = _foreign(target, listed)
    if foreign:
        shown = ", ".join(foreign[:5]) + (
            f" and {len(foreign) - 5} more" if len(foreign) > 5 else ""
        )
        raise _refuse(
            target,
            f"the output folder {target} holds files the planner did not write ({shown}), "
            "so --force does not replace it",
            "move those files out of the folder (or close the program that made them), then "
            "run again",
        )


def _normalised(target: Path) -> Path:
    # Lexically normalised, so "sub/x/../named" creates only sub/named (no empty sub/x).
    return Path(os.path.normpath(os.path.abspath(target)))


def check_output_target(target: Path, *, force: bool, protect: Sequence[Path] = ()) -> None:
    """Refuse an output folder early, before the work of filling it (same rules and errors as
    :func:`write_output_folder`, which checks again when it writes).

    A folder that an interrupted replacement left at ``.<name>.planner-backup`` beside
    ``target`` (``target`` itself missing) is first put back.

    Raises
    ------
    OutputError
        See :func:`write_output_folder`.
    """
    _check_target(target, _normalised(target), force=force, protect=protect)


# renameat2(2), Linux 3.15 and later: RENAME_EXCHANGE swaps two paths in one step.
_AT_FDCWD = -100
_RENAME_NOREPLACE = 1
_RENAME_EXCHANGE = 2
#: System call numbers of renameat2, for a C library without the wrapper (glibc before 2.28),
#: from the kernel's syscall tables (arch/*/entry/syscalls, include/uapi/asm-generic/unistd.h).
_SYSCALL_RENAMEAT2 = {
    "x86_64": 316,
    "amd64": 316,
    "i386": 353,
    "i686": 353,
    "aarch64": 276,
    "arm64": 276,
    "riscv64": 276,
    "loongarch64": 276,
    "armv7l": 382,
    "ppc64le": 357,
    "ppc64": 357,
    "s390x": 347,
}
_UNSUPPORTED = frozenset({errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP})

_Renameat2 = Callable[[bytes, bytes, int], int]


def _load_renameat2(*, symbol: bool = True) -> _Renameat2 | None:
    """renameat2 from the C library (its wrapper, or with ``symbol`` false the raw system
    call), as ``call(old, new, flags) -> 0 or -1 (errno set)``; None off Linux."""
    if not sys.platform.startswith("linux"):
        return None
    try:
        libc = ctypes.CDLL(None, use_errno=True)
    except OSError:
        return None
    wrapper = getattr(libc, "renameat2", None) if symbol else None
    if wrapper is not None:
        wrapper.argtypes = [
            ctypes.c_int,
            ctypes.c_char_p,
            ctypes.c_int,
            ctypes.c_char_p,
            ctypes.c_uint,
        ]
        wrapper.restype = ctypes.c_int

        def call(old: bytes, new: bytes, flags: int) -> int:
            return int(wrapper(_AT_FDCWD, old, _AT_FDCWD, new, flags))

        return call
    number = _SYSCALL_RENAMEAT2.get(platform.machine().lower())
    syscall = getattr(libc, "syscall", None)
    if number is None or syscall is None:
        return None
    syscall.restype = ctypes.c_long

    def raw(old: bytes, new: bytes, flags: int) -> int:
        return int(
            syscall(
                ctypes.c_long(number),
                ctypes.c_int(_AT_FDCWD),
                ctypes.c_char_p(old),
                ctypes.c_int(_AT_FDCWD),
                ctypes.c_char_p(new),
                ctypes.c_uint(flags),
            )
        )

    return raw


@functools.cache
def _renameat2() -> _Renameat2 | None:
    return _load_renameat2()


def _renameat2_flags(old: Path, new: Path, flags: int) -> bool:
    """renameat2 with ``flags``: True when done, False when this system or file system cannot
    (so the caller falls back), OSError on any other failure."""
    call = _renameat2()
    if call is None:
        return False
    if call(os.fsencode(old), os.fsencode(new), flags) == 0:
        return True
    code = ctypes.get_errno()
    if code in _UNSUPPORTED:
        return False
    raise OSError(code, os.strerror(code), str(new))


def _rename_exchange(first: Path, second: Path) -> bool:
    """Swap two existing paths in one atomic step (renameat2 RENAME_EXCHANGE): True when done,
    False when unsupported here."""
    return _renameat2_flags(first, second, _RENAME_EXCHANGE)


def _swap_in(fresh: Path, target: Path) -> None:
    """Put the folder ``fresh`` at ``target`` in place of the folder there; the old one ends
    at ``fresh`` (exchange) or in the backup (two renames), and is the caller's to delete.

    With renameat2's exchange, ``target`` names the old or the new folder at every instant.
    Without it (another system, or a file system that cannot exchange), two renames: the old
    folder goes to ``.<name>.planner-backup`` beside ``target`` and the new one takes its
    place; a kill between the two leaves ``target`` missing, and the next run puts the backup
    back (:func:`_recover`).
    """
    if _rename_exchange(fresh, target):
        return
    backup = _backup_path(target)
    if backup.exists() or backup.is_symlink():
        if backup.is_symlink() or not backup.is_dir() or _listing(backup) is None:
            raise _refuse(
                target,
                f"{backup} is in the way of replacing the output folder",
                "move it away",
            )
        shutil.rmtree(backup)  # an old output an interrupted run had already replaced
    os.replace(target, backup)
    try:
        os.replace(fresh, target)
    except BaseException:
        if not target.exists():
            os.replace(backup, target)
        raise
    os.replace(backup, fresh)


def write_output_folder(
    target: Path,
    files: Mapping[str, bytes | str],
    *,
    force: bool,
    protect: Sequence[Path] = (),
) -> None:
    """Write a folder of files, replacing ``target`` as a whole.

    The files, and the :data:`MARKER_NAME` file listing them, are written into a fresh folder
    inside a temporary folder beside ``target`` (same parent, so the renames that follow stay
    on one file system and are atomic). A new ``target`` is then a rename away; an existing
    one is exchanged with the new folder in one step (Linux renameat2, RENAME_EXCHANGE) and
    the old folder deleted, so ``target`` holds the old or the new folder at every instant.
    Where the exchange is not available, two renames with a backup beside ``target`` that the
    next run restores if a kill came between them (:func:`check_output_target`). On any
    failure before the new folder is in place, the temporary folder is removed and an
    existing ``target`` is left as it was.

    Parameters
    ----------
    target
        The output folder. Its parent is created if missing.
    files
        Relative file name (``/``-separated, e.g. ``benches/section-01.md``) -> content; text
        is written as UTF-8 exactly as given.
    force
        Replace an existing, non-empty ``target`` that the planner wrote (it carries the
        marker file) and that holds nothing but the files the marker lists. An empty folder
        is replaced without it.
    protect
        Files the command reads (the plan file): a folder holding one is never replaced.

    Raises
    ------
    OutputError
        ``target`` is a file or a symbolic link; it is the root of the file system, the
        current or the home folder, or holds one of them or a ``protect`` file; it is not
        empty and ``force`` is false, or it has no marker, or holds files the marker does not
        list; a file name is absolute, contains ``..``, a drive or a backslash, is the
        marker's, or collides with another; the folder could not be written (the message
        names the folder).
    """
    given = target
    target = _normalised(target)
    contents = _check_names(files)
    if PurePosixPath(MARKER_NAME) in contents:
        raise OutputError(
            "an output file has the name the planner keeps for its marker",
            field="files",
            value=MARKER_NAME,
            hint="give the file another name",
        )
    contents[PurePosixPath(MARKER_NAME)] = _marker(contents)
    _check_target(given, target, force=force, protect=protect)
    parent = target.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.planner-tmp-", dir=parent))
    except OSError as error:
        raise OutputError(
            f"cannot create the output folder {target}: {error.strerror or error}",
            field="--out",
            value=str(target),
            hint="check that the parent folder exists and is writable",
        ) from error
    fresh = staging / "new"
    try:
        # mkdir honours the umask; mkdtemp's own folder is private (0700), which is why it only
        # serves as a holder and never becomes the output folder itself.
        fresh.mkdir()
        for path, data in contents.items():
            destination = fresh.joinpath(*path.parts)
            destination.parent.mkdir(parents=True, exist_ok=True)
            _write_file(destination, data)
        if target.exists() or target.is_symlink():
            _swap_in(fresh, target)
        else:
            os.replace(fresh, target)
    except BaseException as error:
        shutil.rmtree(staging, ignore_errors=True)
        if isinstance(error, OSError):
            raise _refuse(
                target,
                f"cannot write the output folder {target}: {error.strerror or error}",
                "check the disk space and the permissions of the parent folder; "
                "any previous folder was left as it was",
            ) from error
        raise
    # The new folder is in place; what is left in staging is the old one.
    try:
        shutil.rmtree(staging)
    except OSError as error:
        raise _refuse(
            staging,
            f"the new output folder {target} is in place, but the old copy in {staging} could "
            f"not be removed: {error.strerror or error}",
            "delete that folder by hand",
        ) from error
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise


def _write_file(path: Path, data: bytes) -> None:
    """Write one new file (exclusive create, bytes as given: no newline translation)."""
    with path.open("xb") as handle:
        handle.write(data)


def _write_fd(descriptor: int, data: bytes) -> None:
    """All of ``data`` to an open file descriptor (os.write may write less than asked)."""
    view = memoryview(data)
    while view:
        written = os.write(descriptor, view)
        view = view[written:]


def _publish(temporary: Path, target: Path) -> None:
    """Give a finished file its name, never replacing a file that took the name meanwhile."""
    if _renameat2_flags(temporary, target, _RENAME_NOREPLACE):
        return
    try:
        os.link(temporary, target)
    except FileExistsError:
        raise
    except OSError:
        # A file system without hard links: a plain rename, after one last look.
        if target.exists() or target.is_symlink():
            raise FileExistsError(errno.EEXIST, os.strerror(errno.EEXIST), str(target)) from None
        os.replace(temporary, target)
        return
    os.unlink(temporary)


def write_new_file(path: Path, data: bytes) -> None:
    """Write a new file atomically: the whole ``data`` or no file at all, never over another.

    The bytes go to a temporary file in the same folder, are flushed to disk (fsync), and the
    file is then given its name in one step; on any failure (a full disk, an interrupt) the
    temporary file is removed and nothing is left at ``path``.

    Raises
    ------
    OutputError
        ``path`` exists (the field is the path), or the file could not be written.
    """
    target = Path(os.path.abspath(path))

    def exists() -> OutputError:
        return OutputError(
            "file exists; not overwriting it",
            field=str(path),
            hint="choose another PATH or remove the file first",
        )

    if target.exists() or target.is_symlink():
        raise exists()
    temporary: Path | None = None
    try:
        flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
        while temporary is None:
            candidate = target.with_name(f".{target.name}.{secrets.token_hex(4)}.planner-tmp")
            try:
                # Mode 0o666 before the umask, as a plain open() would create it.
                descriptor = os.open(candidate, flags, 0o666)
            except FileExistsError:
                continue
            temporary = candidate
        try:
            _write_fd(descriptor, data)
            os.fsync(descriptor)
        finally:
            os.close(descriptor)
        _publish(temporary, target)
        temporary = None
    except FileExistsError:
        raise exists() from None
    except OSError as error:
        raise OutputError(
            f"cannot write the file ({error.strerror or error})",
            field=str(path),
            hint="free some disk space or choose a folder you can write to; nothing was written",
        ) from None
    finally:
        if temporary is not None:
            with contextlib.suppress(OSError):
                temporary.unlink()
