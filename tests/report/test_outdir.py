"""Tests of planner.report.outdir: the output folder's contents and its safe replacement."""

from __future__ import annotations

import errno
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from planner.errors import OutputError
from planner.report import outdir
from planner.report.outdir import (
    MARKER_NAME,
    MAX_BENCH_FILES,
    check_output_target,
    plan_files,
    write_new_file,
    write_output_folder,
)
from tests.report.conftest import make_inputs, make_plan

DATE = "2031-02-03"
ROOT = Path(__file__).resolve().parents[2]


def _tree(folder):
    return {
        str(path.relative_to(folder)): path.read_bytes()
        for path in sorted(folder.rglob("*"))
        if path.is_file()
    }


def _user_files(folder):
    """The tree without the planner's marker."""
    return {name: data for name, data in _tree(folder).items() if name != MARKER_NAME}


@pytest.fixture
def old_folder(tmp_path):
    """A folder an earlier run of the planner wrote (it carries the marker)."""
    target = tmp_path / "out"
    write_output_folder(
        target, {"keep.txt": "old results\n", "sub/deep.txt": "old deep\n"}, force=False
    )
    return target


@pytest.fixture
def user_folder(tmp_path):
    """A folder of the user's own files, which the planner did not write."""
    target = tmp_path / "out"
    (target / "sub").mkdir(parents=True)
    (target / "keep.txt").write_text("my notes\n")
    (target / "sub" / "deep.txt").write_text("my thesis\n")
    return target


def test_plan_files_one_sheet_per_bench(plan):
    files = plan_files(plan, date=DATE)
    for name in (
        "plan.json",
        "mixtures.csv",
        "readings-template.csv",
        "prep-sheet.md",
        "prep-sheet.html",
        "answer-key.md",
        "answer-key.html",
        "bench-sheets.html",
    ):
        assert name in files
    benches = sorted(name for name in files if name.startswith("benches/"))
    # The fixture has 2 sections x 3 benches: a Markdown and an HTML sheet each.
    assert len(benches) == 12
    assert "benches/section-01-bench-01.md" in benches
    assert "benches/section-02-bench-03.html" in benches
    assert "Section 2 of 2" in files["benches/section-02-bench-03.md"]
    assert "Bench 3 of 3" in files["benches/section-02-bench-03.md"]
    assert files["bench-sheets.html"].count('<section class="page">') == 6
    assert json.loads(files["plan.json"])["schema"] == "planner.plan/2"
    assert DATE in files["prep-sheet.md"]


def test_plan_files_one_sheet_per_section_beyond_the_limit():
    plan = make_plan(make_inputs(sections=MAX_BENCH_FILES + 1, benches_per_section=1))
    files = plan_files(plan, date=DATE)
    benches = sorted(name for name in files if name.startswith("benches/"))
    assert len(benches) == 2 * (MAX_BENCH_FILES + 1)
    assert "benches/section-01.md" in benches
    assert "benches/section-61.html" in benches
    assert "Bench ______ of 1" in files["benches/section-61.md"]


def test_plan_files_at_the_limit_still_per_bench():
    plan = make_plan(make_inputs(sections=3, benches_per_section=MAX_BENCH_FILES // 3))
    files = plan_files(plan, date=DATE)
    assert "benches/section-03-bench-20.md" in files


def test_writes_a_new_folder_with_subfolders(tmp_path):
    target = tmp_path / "new" / "out"
    write_output_folder(target, {"a.txt": "é\n", "benches/b.bin": b"\x00\x01"}, force=False)
    assert _user_files(target) == {"a.txt": "é\n".encode(), "benches/b.bin": b"\x00\x01"}
    # The marker says what wrote the folder, then lists its files (and no date, so that the
    # same inputs give the same bytes).
    marker = (target / MARKER_NAME).read_text(encoding="utf-8").splitlines()
    assert marker[0].startswith("# Written by planner")
    assert marker[1:] == ["a.txt", "benches/b.bin"]
    assert sorted(p.name for p in target.parent.iterdir()) == ["out"]


def test_marker_is_the_same_bytes_for_the_same_files(tmp_path):
    files = {"b.txt": "2", "a/c.txt": "3"}
    write_output_folder(tmp_path / "one", files, force=False)
    write_output_folder(tmp_path / "two", dict(reversed(files.items())), force=False)
    assert (tmp_path / "one" / MARKER_NAME).read_bytes() == (
        tmp_path / "two" / MARKER_NAME
    ).read_bytes()


def test_the_marker_name_is_reserved(tmp_path):
    with pytest.raises(OutputError) as info:
        write_output_folder(tmp_path / "out", {MARKER_NAME: "mine"}, force=False)
    assert info.value.field == "files"
    assert not (tmp_path / "out").exists()


def test_refuses_a_non_empty_folder_without_force(old_folder):
    before = _tree(old_folder)
    with pytest.raises(OutputError) as info:
        write_output_folder(old_folder, {"a.txt": "new"}, force=False)
    assert info.value.field == "--out"
    assert str(old_folder) in str(info.value)
    assert "--force" in str(info.value)
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def test_replaces_an_empty_folder_without_force(tmp_path):
    target = tmp_path / "out"
    target.mkdir()
    write_output_folder(target, {"a.txt": "new"}, force=False)
    assert _user_files(target) == {"a.txt": b"new"}


def test_replaces_a_planner_folder_with_force_again_and_again(old_folder):
    write_output_folder(old_folder, {"a.txt": "new"}, force=True)
    assert _user_files(old_folder) == {"a.txt": b"new"}
    write_output_folder(old_folder, {"b.txt": "newer"}, force=True)
    assert _user_files(old_folder) == {"b.txt": b"newer"}
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


@pytest.mark.parametrize("force", [False, True])
def test_never_replaces_a_folder_the_planner_did_not_write(user_folder, force):
    # Issue 9: --force used to delete any non-empty folder it was given.
    before = _tree(user_folder)
    with pytest.raises(OutputError) as info:
        write_output_folder(user_folder, {"a.txt": "new"}, force=force)
    assert info.value.field == "--out"
    assert MARKER_NAME in str(info.value)
    assert "Fix:" in str(info.value)
    assert _tree(user_folder) == before
    assert sorted(p.name for p in user_folder.parent.iterdir()) == ["out"]


def test_force_refuses_a_planner_folder_holding_the_users_files(old_folder):
    (old_folder / "my-notes.txt").write_text("mine\n")
    (old_folder / "photos").mkdir()
    (old_folder / "sub" / "extra").mkdir()
    before = _tree(old_folder)
    with pytest.raises(OutputError) as info:
        write_output_folder(old_folder, {"a.txt": "new"}, force=True)
    message = str(info.value)
    for name in ("my-notes.txt", "photos/", "sub/extra/"):
        assert name in message
    assert "keep.txt" not in message
    assert _tree(old_folder) == before
    assert (old_folder / "photos").is_dir()


def test_force_ignores_file_manager_litter(old_folder):
    (old_folder / ".DS_Store").write_bytes(b"\x00\x00\x00\x01Bud1")
    write_output_folder(old_folder, {"a.txt": "new"}, force=True)
    assert _user_files(old_folder) == {"a.txt": b"new"}


def test_refuses_a_symbolic_link(tmp_path, old_folder):
    link = tmp_path / "link"
    link.symlink_to(old_folder)
    before = _tree(old_folder)
    with pytest.raises(OutputError, match="symbolic link"):
        write_output_folder(link, {"a.txt": "new"}, force=True)
    assert link.is_symlink()
    assert _tree(old_folder) == before


def test_refuses_a_file_as_target(tmp_path):
    target = tmp_path / "out"
    target.write_text("a file")
    with pytest.raises(OutputError, match="not a folder"):
        write_output_folder(target, {"a.txt": "new"}, force=True)
    assert target.read_text() == "a file"


# --------------------------------------------------------------------------------------------
# Folders never replaced, marker or not
# --------------------------------------------------------------------------------------------


@pytest.fixture
def work(tmp_path, monkeypatch):
    """The current folder tmp/home/work, itself a planner output folder (so only the guard
    against replacing the current folder and its parents can refuse it), and HOME tmp/home."""
    home = tmp_path / "home"
    work = home / "work"
    write_output_folder(work, {"inner/x.txt": "x"}, force=False)
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.chdir(work)
    return work


@pytest.mark.parametrize(
    ("out", "reason"),
    [
        (".", "the current folder"),
        ("inner/..", "the current folder"),
        ("..", "a folder that holds the current folder"),
        ("../..", "a folder that holds the current folder"),
    ],
)
def test_force_never_replaces_the_current_folder_or_its_parents(tmp_path, work, out, reason):
    before = _tree(tmp_path)
    with pytest.raises(OutputError) as info:
        write_output_folder(Path(out), {"a.txt": "new"}, force=True)
    assert info.value.field == "--out"
    assert reason in str(info.value)
    assert "Fix:" in str(info.value)
    assert _tree(tmp_path) == before


def test_force_never_replaces_a_path_that_resolves_to_the_current_folder(tmp_path, work):
    # other/link/.. is "other" read lexically but the current folder once the link is followed.
    other = tmp_path / "other"
    other.mkdir()
    (other / "link").symlink_to(work / "inner")
    with pytest.raises(OutputError, match="the current folder"):
        check_output_target(other / "link" / "..", force=True)
    with pytest.raises(OutputError, match="the current folder"):
        write_output_folder(other / "link" / "..", {"a.txt": "new"}, force=True)
    assert (work / "inner" / "x.txt").read_text() == "x"
    assert sorted(p.name for p in other.iterdir()) == ["link"]


def test_force_never_replaces_the_home_folder(tmp_path, monkeypatch):
    home = tmp_path / "home"
    write_output_folder(home, {"x.txt": "x"}, force=False)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.chdir(elsewhere)
    with pytest.raises(OutputError, match="the home folder"):
        write_output_folder(home, {"a.txt": "new"}, force=True)
    assert _user_files(home) == {"x.txt": b"x"}


def test_force_never_replaces_the_folder_of_the_plan_file(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    inputs = tmp_path / "inputs"
    write_output_folder(inputs, {"plan.toml": "title = 'mine'\n"}, force=False)
    plan = inputs / "plan.toml"
    for target in (inputs, tmp_path / "inputs" / "." / "sub" / ".."):
        with pytest.raises(OutputError, match="holds the plan file"):
            write_output_folder(target, {"a.txt": "new"}, force=True, protect=(plan,))
    assert plan.read_text() == "title = 'mine'\n"


def test_never_replaces_the_root_of_the_file_system():
    # Only the check is called: the root is never handed to the writer in a test.
    with pytest.raises(OutputError, match="the root of the file system"):
        check_output_target(Path(os.sep), force=True)


# --------------------------------------------------------------------------------------------
# The swap: old or new folder at the target at every instant
# --------------------------------------------------------------------------------------------


def _two_folders(tmp_path):
    first, second = tmp_path / "first", tmp_path / "second"
    first.mkdir()
    second.mkdir()
    (first / "one.txt").write_text("1")
    (second / "two.txt").write_text("2")
    return first, second


def test_exchange_swaps_two_folders_in_one_step(tmp_path):
    first, second = _two_folders(tmp_path)
    assert outdir._rename_exchange(first, second) is True
    assert _tree(first) == {"two.txt": b"2"}
    assert _tree(second) == {"one.txt": b"1"}


def test_exchange_by_system_call_number(tmp_path):
    # The path taken when the C library has no renameat2 wrapper (glibc before 2.28).
    first, second = _two_folders(tmp_path)
    call = outdir._load_renameat2(symbol=False)
    assert call is not None
    assert call(os.fsencode(first), os.fsencode(second), outdir._RENAME_EXCHANGE) == 0
    assert _tree(first) == {"two.txt": b"2"}
    assert _tree(second) == {"one.txt": b"1"}


@pytest.mark.parametrize("error", [OSError(28, "No space left on device"), RuntimeError("bug")])
def test_fault_mid_write_leaves_old_folder_and_no_temp(old_folder, monkeypatch, error):
    before = _tree(old_folder)
    real_write = outdir._write_file
    calls = []

    def failing_write(path, data):
        calls.append(path)
        if len(calls) == 2:
            raise error
        real_write(path, data)

    monkeypatch.setattr(outdir, "_write_file", failing_write)
    expected = OutputError if isinstance(error, OSError) else RuntimeError
    with pytest.raises(expected):
        write_output_folder(old_folder, {"a.txt": "1", "b.txt": "2", "c.txt": "3"}, force=True)
    assert len(calls) == 2
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def test_fault_in_the_exchange_leaves_old_folder(old_folder, monkeypatch):
    before = _tree(old_folder)

    def failing_exchange(first, second):
        raise OSError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(outdir, "_rename_exchange", failing_exchange)
    with pytest.raises(OutputError, match="left as it was"):
        write_output_folder(old_folder, {"a.txt": "1"}, force=True)
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def _no_exchange(monkeypatch):
    """Take the two-rename path, as on a system or file system without RENAME_EXCHANGE."""
    monkeypatch.setattr(outdir, "_rename_exchange", lambda first, second: False)


def test_two_rename_swap_replaces_and_leaves_nothing_beside(old_folder, monkeypatch):
    _no_exchange(monkeypatch)
    write_output_folder(old_folder, {"a.txt": "new"}, force=True)
    assert _user_files(old_folder) == {"a.txt": b"new"}
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def test_fault_in_final_rename_restores_old_folder(old_folder, monkeypatch):
    _no_exchange(monkeypatch)
    before = _tree(old_folder)
    real_replace = outdir.os.replace

    def failing_replace(source, destination):
        if str(source).endswith("new"):
            raise OSError(13, "Permission denied")
        real_replace(source, destination)

    monkeypatch.setattr(outdir.os, "replace", failing_replace)
    with pytest.raises(OutputError, match="left as it was"):
        write_output_folder(old_folder, {"a.txt": "1"}, force=True)
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


# A run of write_output_folder that is killed (os._exit: no clean-up runs, as with SIGKILL or
# a power cut) at one point of the swap.
_KILLED_RUN = """
import os, sys
from pathlib import Path
from planner.report import outdir

point, target = sys.argv[1], Path(sys.argv[2])
real_exchange, real_replace, real_write = outdir._rename_exchange, os.replace, outdir._write_file
renames = []

def exchange(first, second):
    if point.startswith("two-renames"):
        return False
    done = real_exchange(first, second)
    os._exit(17 if done else 18)  # killed before the old folder is deleted

def replace(source, destination):
    real_replace(source, destination)
    renames.append(source)
    if (point, len(renames)) in (("two-renames-1", 1), ("two-renames-2", 2)):
        os._exit(17)

def write(path, data):
    real_write(path, data)
    if point == "mid-write":
        os._exit(17)

outdir._rename_exchange, os.replace, outdir._write_file = exchange, replace, write
outdir.write_output_folder(target, {"new.txt": "new", "sub/new.txt": "new"}, force=True)
os._exit(0)
"""


def _killed_run(point, target):
    done = subprocess.run(
        [sys.executable, "-c", _KILLED_RUN, point, str(target)],
        env={**os.environ, "PYTHONPATH": str(ROOT)},
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 17, done.stderr


NEW = {"new.txt": b"new", "sub/new.txt": b"new"}


def test_killed_while_writing_leaves_the_old_folder(old_folder):
    before = _tree(old_folder)
    _killed_run("mid-write", old_folder)
    assert _tree(old_folder) == before


def test_killed_right_after_the_exchange_leaves_the_new_folder(old_folder):
    _killed_run("after-exchange", old_folder)
    assert _user_files(old_folder) == NEW
    # The next run replaces it as usual.
    write_output_folder(old_folder, {"a.txt": "next"}, force=True)
    assert _user_files(old_folder) == {"a.txt": b"next"}


def test_killed_between_the_two_renames_is_put_back_by_the_next_run(old_folder, monkeypatch):
    before = _tree(old_folder)
    _killed_run("two-renames-1", old_folder)
    backup = old_folder.with_name(".out.planner-backup")
    assert not old_folder.exists()
    assert _tree(backup) == before
    # The next run, even one that only checks the folder, puts the old folder back first.
    with pytest.raises(OutputError, match="--force"):
        check_output_target(old_folder, force=False)
    assert _tree(old_folder) == before
    assert not backup.exists()
    _no_exchange(monkeypatch)
    write_output_folder(old_folder, {"a.txt": "next"}, force=True)
    assert _user_files(old_folder) == {"a.txt": b"next"}


def test_killed_after_the_two_renames_leaves_the_new_folder(old_folder, monkeypatch):
    _killed_run("two-renames-2", old_folder)
    backup = old_folder.with_name(".out.planner-backup")
    assert _user_files(old_folder) == NEW
    assert backup.is_dir()
    # The next two-rename swap removes the stale backup (an old planner output) first.
    _no_exchange(monkeypatch)
    write_output_folder(old_folder, {"a.txt": "next"}, force=True)
    assert _user_files(old_folder) == {"a.txt": b"next"}
    assert not backup.exists()


# --------------------------------------------------------------------------------------------
# One new file (planner init): whole or not at all
# --------------------------------------------------------------------------------------------


def test_write_new_file_writes_the_bytes(tmp_path):
    target = tmp_path / "plan.toml"
    write_new_file(target, b"title = 'x'\r\n")
    assert target.read_bytes() == b"title = 'x'\r\n"
    assert [p.name for p in tmp_path.iterdir()] == ["plan.toml"]


def _half_then_full_disk(descriptor, data):
    os.write(descriptor, data[: len(data) // 2])
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


@pytest.mark.parametrize("where", ["write", "fsync"])
def test_write_new_file_on_a_full_disk_leaves_no_file(tmp_path, monkeypatch, where):
    if where == "write":
        monkeypatch.setattr(outdir, "_write_fd", _half_then_full_disk)
    else:

        def full_disk(descriptor):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

        monkeypatch.setattr(outdir.os, "fsync", full_disk)
    target = tmp_path / "plan.toml"
    with pytest.raises(OutputError) as info:
        write_new_file(target, b"x" * 10_000)
    assert info.value.field == str(target)
    assert os.strerror(errno.ENOSPC) in str(info.value)
    assert list(tmp_path.iterdir()) == []


def test_write_new_file_interrupted_leaves_no_file(tmp_path, monkeypatch):
    def interrupted(descriptor, data):
        os.write(descriptor, data[:10])
        raise KeyboardInterrupt

    monkeypatch.setattr(outdir, "_write_fd", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_new_file(tmp_path / "plan.toml", b"x" * 100)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("hard_links_only", [False, True])
def test_write_new_file_never_replaces_a_file_made_meanwhile(
    tmp_path, monkeypatch, hard_links_only
):
    target = tmp_path / "plan.toml"
    real_write = outdir._write_fd

    def someone_else_writes_first(descriptor, data):
        target.write_text("theirs")
        real_write(descriptor, data)

    monkeypatch.setattr(outdir, "_write_fd", someone_else_writes_first)
    if hard_links_only:
        monkeypatch.setattr(outdir, "_renameat2_flags", lambda old, new, flags: False)
    with pytest.raises(OutputError, match="not overwriting"):
        write_new_file(target, b"mine")
    assert target.read_text() == "theirs"
    assert [p.name for p in tmp_path.iterdir()] == ["plan.toml"]


def test_write_new_file_refuses_an_existing_file(tmp_path):
    target = tmp_path / "plan.toml"
    target.write_text("theirs")
    with pytest.raises(OutputError, match="not overwriting"):
        write_new_file(target, b"mine")
    assert target.read_text() == "theirs"


@pytest.mark.parametrize(
    "name", ["../x", "a/../../x", "/etc/x", "a/..", "", ".", "C:/x", "a\\..\\x", "sub/../x"]
)
def test_rejects_names_outside_the_folder(tmp_path, name):
    target = tmp_path / "out"
    with pytest.raises(OutputError) as info:
        write_output_folder(target, {"ok.txt": "fine", name: "bad"}, force=True)
    assert info.value.field == "files"
    assert not target.exists()
    assert list(tmp_path.iterdir()) == []


def test_rejects_a_file_name_used_as_a_folder(tmp_path):
    with pytest.raises(OutputError, match="also used as a folder"):
        write_output_folder(tmp_path / "out", {"a": "1", "a/b": "2"}, force=False)


def test_whole_plan_folder_round_trip(tmp_path, plan):
    files = plan_files(plan, date=DATE)
    target = tmp_path / "plan-out"
    write_output_folder(target, files, force=False)
    written = _tree(target)
    assert set(written) == {*files, MARKER_NAME}
    assert sorted((target / MARKER_NAME).read_text().splitlines()[1:]) == sorted(files)
    assert written["plan.json"] == files["plan.json"].encode("utf-8")
