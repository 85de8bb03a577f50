"""Reproducible output folders, and commands that write only where they are told.

DESIGN.md section 2 and STYLE.md section 7: the same inputs and seed give byte-identical
files, and no command writes outside the folder (or file) it was given.

The runs here are whole processes (``python -m planner``), not CliRunner calls: only a fresh
interpreter shows nondeterminism from string hashing (set and dict orders of str keys vary
with PYTHONHASHSEED), and only a process with its own HOME, TMPDIR and cache folders shows
writes to them (a library's font or config cache, a stray temporary file). Bytecode writing
is switched off so that the interpreter itself writes nothing into the source tree.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
RECIPES = sorted((ROOT / "recipes").glob("*.toml"))
DATE = "2026-01-01"


def run_planner(args: list[str], *, cwd: Path, home: Path, hash_seed: str = "0"):
    """Run ``python -m planner ARGS`` in ``cwd`` with HOME, TMPDIR and caches under ``home``
    (which must hold a ``tmp`` folder)."""
    env = {
        "PATH": os.environ.get("PATH", "/usr/bin:/bin"),
        "PYTHONPATH": str(ROOT),
        "PYTHONHASHSEED": hash_seed,
        "PYTHONDONTWRITEBYTECODE": "1",
        "HOME": str(home),
        "TMPDIR": str(home / "tmp"),
        "XDG_CACHE_HOME": str(home / ".cache"),
        "XDG_CONFIG_HOME": str(home / ".config"),
        "NO_COLOR": "1",
        "COLUMNS": "100",
        "LANG": "C.UTF-8",
    }
    return subprocess.run(
        [sys.executable, "-m", "planner", *args],
        cwd=cwd,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )


def snapshot(root: Path) -> dict[str, str]:
    """Every entry under root: relative path -> 'dir', 'link:<target>' or the file's SHA-256."""
    entries: dict[str, str] = {}
    for folder, dirs, files in os.walk(root, followlinks=False):
        for name in dirs + files:
            path = Path(folder, name)
            key = path.relative_to(root).as_posix()
            if path.is_symlink():
                entries[key] = f"link:{os.readlink(path)}"
            elif path.is_dir():
                entries[key] = "dir"
            else:
                entries[key] = hashlib.sha256(path.read_bytes()).hexdigest()
    return entries


def files_of(folder: Path) -> dict[str, bytes]:
    return {
        path.relative_to(folder).as_posix(): path.read_bytes()
        for path in sorted(folder.rglob("*"))
        if path.is_file()
    }


@pytest.fixture
def sandbox(tmp_path):
    """An empty working folder and an empty home inside tmp_path, plus a plan file copy."""
    work = tmp_path / "work"
    home = tmp_path / "home"
    inputs = tmp_path / "inputs"
    for folder in (work, home / "tmp", inputs):
        folder.mkdir(parents=True)
    return tmp_path, work, home, inputs


# --------------------------------------------------------------------------------------------
# Same inputs, same bytes
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "recipe", [None, *RECIPES], ids=["default", *(path.stem for path in RECIPES)]
)
def test_same_inputs_give_byte_identical_folders(sandbox, recipe):
    _, work, home, _ = sandbox
    plan_args = ["plan"] if recipe is None else ["plan", str(recipe)]
    # Two processes with different string-hash seeds, into different folders.
    first = run_planner([*plan_args, "--out", "A", "--date", DATE], cwd=work, home=home)
    second = run_planner(
        [*plan_args, "--out", "B", "--date", DATE], cwd=work, home=home, hash_seed="12345"
    )
    assert first.returncode in (0, 1), first.stderr
    assert second.returncode == first.returncode, (first.stderr, second.stderr)
    a, b = files_of(work / "A"), files_of(work / "B")
    assert "plan.json" in a
    assert len(a) >= 7  # plan.json, CSV, prep sheet and answer key (md, html), bench sheets
    assert sorted(a) == sorted(b)
    for name in a:
        assert a[name] == b[name], f"{name} differs between two identical runs"
    # stdout (the terminal summary) is reproducible too, apart from the folder name.
    assert first.stdout == second.stdout


def test_variants_same_seed_byte_identical_other_seed_other_tests(sandbox):
    # Issue 11: sections get distinct test recipes by construction; the construction draws
    # from the seed's one generator only, so two processes (other string-hash seeds) give the
    # same folders and the same section-distinctness line, and another seed other tests.
    _, work, home, _ = sandbox
    recipe = str(ROOT / "recipes" / "iron-thiocyanate-flasks.toml")
    args = ["variants", recipe, "--sections", "3", "--date", DATE]
    first = run_planner([*args, "--seed", "4", "--out", "A"], cwd=work, home=home)
    second = run_planner([*args, "--seed", "4", "--out", "B"], cwd=work, home=home, hash_seed="999")
    other = run_planner([*args, "--seed", "5", "--out", "C"], cwd=work, home=home)
    assert first.returncode == second.returncode == other.returncode == 0, first.stderr
    a, b, c = files_of(work / "A"), files_of(work / "B"), files_of(work / "C")
    assert sorted(a) == sorted(b) == sorted(c)
    for name in a:
        assert a[name] == b[name], f"{name} differs between two identical runs"
    said = [line for line in first.stderr.splitlines() if not line.startswith("wrote")]
    assert said == [line for line in second.stderr.splitlines() if not line.startswith("wrote")]
    assert "section-distinctness" in first.stderr

    def tests_of(files, section):
        mixtures = json.loads(files[f"section-0{section}/plan.json"])["mixtures"]
        return [m["additions"] for m in mixtures if m["role"] == "test"]

    assert tests_of(a, 1) == tests_of(c, 1)  # section 1 is the plan itself
    assert [tests_of(a, n) for n in (2, 3)] != [tests_of(c, n) for n in (2, 3)]


def test_json_on_stdout_is_byte_identical_and_matches_the_folder(sandbox):
    _, work, home, _ = sandbox
    recipe = str(RECIPES[0])
    args = ["plan", recipe, "--format", "json", "--date", DATE]
    first = run_planner([*args, "--out", "A"], cwd=work, home=home, hash_seed="1")
    second = run_planner(args, cwd=work, home=home, hash_seed="2")
    assert first.returncode in (0, 1), first.stderr
    assert first.stdout == second.stdout
    assert json.loads(first.stdout)["schema"] == "planner.plan/2"
    assert (work / "A" / "plan.json").read_text(encoding="utf-8") == first.stdout


def test_the_date_is_the_only_thing_the_date_changes(sandbox):
    # The sheets carry the date they were printed for; plan.json does not depend on it.
    _, work, home, _ = sandbox
    recipe = str(RECIPES[0])
    run_planner(["plan", recipe, "--out", "A", "--date", DATE], cwd=work, home=home)
    run_planner(["plan", recipe, "--out", "B", "--date", "2026-02-03"], cwd=work, home=home)
    a, b = files_of(work / "A"), files_of(work / "B")
    assert a["plan.json"] == b["plan.json"]
    differing = [name for name in a if a[name] != b[name]]
    assert differing, "the sheets should show the date"
    for name in differing:
        assert DATE.encode() in a[name]
        assert a[name].replace(DATE.encode(), b"2026-02-03") == b[name], name


# --------------------------------------------------------------------------------------------
# Writing only where told
# --------------------------------------------------------------------------------------------


def _copy_plan(inputs: Path) -> Path:
    plan = inputs / "plan.toml"
    plan.write_bytes(RECIPES[0].read_bytes())
    return plan


def _new_entries(before: dict[str, str], after: dict[str, str]) -> set[str]:
    changed = {key for key in before if after.get(key) != before[key]}
    assert not changed, f"entries changed or removed: {sorted(changed)}"
    return set(after) - set(before)


def test_plan_out_writes_only_the_named_folder(sandbox):
    root, work, home, inputs = sandbox
    plan = _copy_plan(inputs)
    before = snapshot(root)
    result = run_planner(
        ["plan", str(plan), "--out", str(root / "out"), "--date", DATE], cwd=work, home=home
    )
    assert result.returncode in (0, 1), result.stderr
    new = _new_entries(before, snapshot(root))
    assert "out" in new
    outside = sorted(entry for entry in new if entry != "out" and not entry.startswith("out/"))
    assert outside == [], "written outside the --out folder"
    assert any(entry.startswith("out/") for entry in new)


@pytest.mark.parametrize(
    ("cwd_parts", "out", "expected"),
    [
        (("work",), "../escape", "escape"),
        (("work", "inner", "deeper"), "../../escape", "work/escape"),
        (("work",), "new/nested/folder", "work/new/nested/folder"),
        (("work",), "./here", "work/here"),
        (("work",), "sub/x/../named", "work/sub/named"),
    ],
)
def test_relative_out_writes_only_that_folder(tmp_path, cwd_parts, out, expected):
    home = tmp_path / "home"
    cwd = tmp_path.joinpath(*cwd_parts)
    cwd.mkdir(parents=True)
    (home / "tmp").mkdir(parents=True)
    plan = _copy_plan(home)  # the plan file sits in the (snapshotted) home folder
    before = snapshot(tmp_path)
    result = run_planner(["plan", str(plan), "--out", out, "--date", DATE], cwd=cwd, home=home)
    assert result.returncode in (0, 1), result.stderr
    new = _new_entries(before, snapshot(tmp_path))
    # The named folder and the parents it needed, and nothing else.
    parents = {"/".join(expected.split("/")[:n]) for n in range(1, expected.count("/") + 1)}
    outside = sorted(
        entry
        for entry in new
        if entry != expected and not entry.startswith(expected + "/") and entry not in parents
    )
    assert outside == []
    assert (tmp_path / expected / "plan.json").is_file()


def test_refused_out_writes_nothing(sandbox):
    # A non-empty folder without --force is refused (exit 2) and left as it was.
    root, work, home, inputs = sandbox
    plan = _copy_plan(inputs)
    (work / "taken").mkdir()
    (work / "taken" / "notes.txt").write_text("keep me\n", encoding="utf-8")
    before = snapshot(root)
    result = run_planner(["plan", str(plan), "--out", "taken", "--date", DATE], cwd=work, home=home)
    assert result.returncode == 2
    assert "--force" in result.stderr
    assert snapshot(root) == before


@pytest.fixture(scope="module")
def saved_result(tmp_path_factory):
    """A saved plan result (plan.json) of the first recipe, for ``verify``."""
    folder = tmp_path_factory.mktemp("saved")
    (folder / "tmp").mkdir()
    result = run_planner(["plan", str(RECIPES[0]), "--format", "json"], cwd=folder, home=folder)
    assert result.returncode in (0, 1), result.stderr
    path = folder / "plan.json"
    path.write_text(result.stdout, encoding="utf-8")
    return path


@pytest.mark.parametrize(
    ("args", "allowed"),
    [
        (["check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4"], set()),
        (
            ["check", "--k", "1e4", "--excess", "0.01", "--limiting", "2e-4", "--format", "json"],
            set(),
        ),
        (["plan", "{plan}"], set()),
        (["plan", "{plan}", "--format", "json"], set()),
        (["plan"], set()),
        (["init", "starter.toml"], {"work/starter.toml"}),
        (["init", "../starter.toml"], {"starter.toml"}),
        (["verify", "{saved}"], set()),
        (["verify", "{saved}", "--format", "json"], set()),
    ],
)
def test_commands_write_nothing_but_what_they_name(sandbox, saved_result, args, allowed):
    root, work, home, inputs = sandbox
    plan = _copy_plan(inputs)
    saved = inputs / "plan.json"
    saved.write_bytes(saved_result.read_bytes())
    args = [arg.format(plan=plan, saved=saved) for arg in args]
    before = snapshot(root)
    result = run_planner(args, cwd=work, home=home)
    assert result.returncode in (0, 1), result.stderr
    assert "Traceback" not in result.stderr
    assert _new_entries(before, snapshot(root)) == allowed
