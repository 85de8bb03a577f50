"""Reproducible output folders, and commands that write only where they are told.

DESIGN.md section 2 and STYLE.md section 7: the same inputs and seed give byte-identical
files, and no command writes outside the folder (or file) it was given.

The runs here are whole processes (``python -m planner``, or one fresh interpreter running
several commands through the command-line app), not CliRunner calls in the test process:
only a fresh interpreter shows nondeterminism from string hashing (set and dict orders of
str keys vary with PYTHONHASHSEED, once per interpreter), and only a process with its own
HOME, TMPDIR and cache folders shows writes to them (a library's font or config cache, a
stray temporary file). Bytecode writing is switched off so that the interpreter itself writes
nothing into the source tree.
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


def run_planner(
    args: list[str], *, cwd: Path, home: Path, hash_seed: str = "0", module: bool = True
):
    """Run ``python -m planner ARGS`` (``python ARGS`` without ``module``) in ``cwd`` with
    HOME, TMPDIR and caches under ``home`` (which must hold a ``tmp`` folder)."""
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
        [sys.executable, *(["-m", "planner"] if module else []), *args],
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

#: The commands each fresh interpreter runs, one after another, in its own working folder:
#: every recipe planned into a folder named after it, two variant sets and the JSON runs. One
#: interpreter per string-hash seed runs them all (the seed is per interpreter, so each
#: command of it sees the seed's set and dict orders), and every comparison below is between
#: the two interpreters' outputs: far fewer processes than one per command and output kind.
_RECIPE_RUNS = {
    path.stem if path is not None else "default": (
        ["plan"] if path is None else ["plan", str(path)]
    )
    for path in [None, *RECIPES]
}
_FLASKS = str(ROOT / "recipes" / "iron-thiocyanate-flasks.toml")
_OTHER_DATE = "2026-02-03"
_SEEDS = ("0", "12345")


#: The run that draws the plots: the figures only draw numbers that every run's other files
#: hold, so one plan's three figures show that drawing them is reproducible (a second a plan).
_WITH_PLOTS = ("default",)


def _jobs(hash_seed: str) -> dict[str, list[str]]:
    jobs = {
        stem: [
            *args,
            "--out",
            stem,
            "--date",
            DATE,
            *([] if stem in _WITH_PLOTS else ["--no-plots"]),
        ]
        for stem, args in _RECIPE_RUNS.items()
    }
    variants = ["variants", _FLASKS, "--sections", "3", "--date", DATE]
    jobs["variants-4"] = [*variants, "--seed", "4", "--out", "variants-4"]
    jobs["json"] = ["plan", str(RECIPES[0]), "--format", "json", "--date", DATE]
    if hash_seed == _SEEDS[0]:
        jobs["variants-5"] = [*variants, "--seed", "5", "--out", "variants-5"]
        # Another date, with JSON on stdout and a folder at once, plotted as its recipe's run.
        jobs["dated"] = [
            "plan", str(RECIPES[0]), "--format", "json", "--out", "dated", "--date", _OTHER_DATE,
            *([] if RECIPES[0].stem in _WITH_PLOTS else ["--no-plots"]),
        ]  # fmt: skip
    return jobs


#: Run in the fresh interpreter: every job (a working folder, "" for the interpreter's own,
#: and the arguments) through the command-line app in this interpreter, then one JSON line
#: with each job's exit status, stdout and stderr. A crash is not caught: it fails the
#: process, and the test.
_CHILD = """
import json, os, sys
from typer.testing import CliRunner
from planner.cli import app
runner = CliRunner()
results = {}
for name, (cwd, args) in json.loads(sys.argv[1]).items():
    if cwd:
        os.chdir(cwd)
    done = runner.invoke(app, args, catch_exceptions=False)
    results[name] = [done.exit_code, done.stdout, done.stderr]
sys.__stdout__.write(json.dumps(results))
"""


def run_jobs(
    jobs: dict[str, tuple[str, list[str]]], *, cwd: Path, home: Path, hash_seed: str = "0"
) -> dict[str, tuple[int, str, str]]:
    """Run every job (working folder, arguments) in one fresh interpreter, in order: job name
    -> exit status, stdout, stderr."""
    done = run_planner(
        ["-c", _CHILD, json.dumps(jobs)], cwd=cwd, home=home, hash_seed=hash_seed, module=False
    )
    assert done.returncode == 0, done.stderr[-3000:]
    return {name: tuple(result) for name, result in json.loads(done.stdout).items()}


class Run:
    """One job's exit status, stdout and stderr, and its working folder."""

    def __init__(self, work: Path, returncode: int, stdout: str, stderr: str) -> None:
        self.work, self.returncode, self.stdout, self.stderr = work, returncode, stdout, stderr

    def files(self, folder: str) -> dict[str, bytes]:
        return files_of(self.work / folder)


@pytest.fixture(scope="module")
def seed_runs(tmp_path_factory) -> dict[str, dict[str, Run]]:
    """hash seed -> job name -> Run, each seed's jobs run in one fresh interpreter."""
    runs: dict[str, dict[str, Run]] = {}
    for hash_seed in _SEEDS:
        root = tmp_path_factory.mktemp(f"seed-{hash_seed}")
        work, home = root / "work", root / "home"
        for folder in (work, home / "tmp"):
            folder.mkdir(parents=True)
        jobs = {name: ("", args) for name, args in _jobs(hash_seed).items()}
        done = run_jobs(jobs, cwd=work, home=home, hash_seed=hash_seed)
        runs[hash_seed] = {name: Run(work, *result) for name, result in done.items()}
    return runs


@pytest.mark.parametrize("stem", list(_RECIPE_RUNS))
def test_same_inputs_give_byte_identical_folders(seed_runs, stem):
    # Two interpreters with different string-hash seeds, each into its own folder.
    first, second = (seed_runs[seed][stem] for seed in _SEEDS)
    assert first.returncode in (0, 1), first.stderr
    assert second.returncode == first.returncode, (first.stderr, second.stderr)
    a, b = first.files(stem), second.files(stem)
    assert "plan.json" in a
    assert len(a) >= 7  # plan.json, CSV, prep sheet and answer key (md, html), bench sheets
    assert sorted(a) == sorted(b)
    for name in a:
        assert a[name] == b[name], f"{name} differs between two identical runs"
    # stdout (the terminal summary) is reproducible too.
    assert first.stdout
    assert first.stdout == second.stdout


def test_variants_same_seed_byte_identical_other_seed_other_tests(seed_runs):
    # Issue 11: sections get distinct test recipes by construction; the construction draws
    # from the seed's one generator only, so two interpreters (other string-hash seeds) give
    # the same folders and the same section-distinctness line, and another seed other tests.
    first, second = (seed_runs[seed]["variants-4"] for seed in _SEEDS)
    other = seed_runs[_SEEDS[0]]["variants-5"]
    assert first.returncode == second.returncode == other.returncode == 0, first.stderr
    a, b = first.files("variants-4"), second.files("variants-4")
    c = other.files("variants-5")
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


def test_json_on_stdout_is_byte_identical_and_matches_the_folder(seed_runs):
    first, second = (seed_runs[seed]["json"] for seed in _SEEDS)
    assert first.returncode in (0, 1), first.stderr
    assert first.stdout == second.stdout
    assert json.loads(first.stdout)["schema"] == "planner.plan/2"
    # The folder a text run wrote holds the same plan.json, and so does the folder of a run
    # asked for JSON on stdout and a folder at once.
    stem = RECIPES[0].stem
    assert seed_runs[_SEEDS[1]][stem].files(stem)["plan.json"] == first.stdout.encode()
    dated = seed_runs[_SEEDS[0]]["dated"]
    assert dated.returncode == first.returncode, dated.stderr
    assert dated.files("dated")["plan.json"] == dated.stdout.encode()


def test_the_date_is_the_only_thing_the_date_changes(seed_runs):
    # The sheets carry the date they were printed for; plan.json does not depend on it.
    stem = RECIPES[0].stem
    a = seed_runs[_SEEDS[0]][stem].files(stem)
    b = seed_runs[_SEEDS[0]]["dated"].files("dated")
    assert a["plan.json"] == b["plan.json"]
    differing = [name for name in a if a[name] != b[name]]
    assert differing, "the sheets should show the date"
    for name in differing:
        assert DATE.encode() in a[name]
        assert a[name].replace(DATE.encode(), _OTHER_DATE.encode()) == b[name], name


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


#: Relative --out folders: the working folder, the --out argument, the folder it names (all
#: relative to the case's own folder).
_RELATIVE_CASES = [
    (("work",), "../escape", "escape"),
    (("work", "inner", "deeper"), "../../escape", "work/escape"),
    (("work",), "new/nested/folder", "work/new/nested/folder"),
    (("work",), "./here", "work/here"),
    (("work",), "sub/x/../named", "work/sub/named"),
]


@pytest.fixture(scope="module")
def relative_runs(tmp_path_factory):
    """Every relative case planned by one fresh interpreter, each from its working folder
    inside its own case folder: the snapshots before and after, and each case's run."""
    root = tmp_path_factory.mktemp("relative")
    home = root / "home"
    (home / "tmp").mkdir(parents=True)
    plan = _copy_plan(home)  # the plan file sits in the (snapshotted) home folder
    jobs = {}
    for number, (cwd_parts, out, _) in enumerate(_RELATIVE_CASES):
        cwd = root.joinpath(f"case-{number}", *cwd_parts)
        cwd.mkdir(parents=True)
        jobs[str(number)] = (str(cwd), ["plan", str(plan), "--out", out, "--date", DATE])
    before = snapshot(root)
    done = run_jobs(jobs, cwd=home, home=home)
    return root, before, snapshot(root), done


def test_relative_out_runs_write_nothing_outside_their_cases(relative_runs):
    _, before, after, _ = relative_runs
    new = _new_entries(before, after)
    assert new
    assert sorted(entry for entry in new if not entry.startswith("case-")) == []


@pytest.mark.parametrize("number", range(len(_RELATIVE_CASES)))
def test_relative_out_writes_only_that_folder(relative_runs, number):
    root, before, after, done = relative_runs
    _, _, expected = _RELATIVE_CASES[number]
    returncode, _, stderr = done[str(number)]
    assert returncode in (0, 1), stderr
    case = f"case-{number}/"
    new = {
        entry.removeprefix(case) for entry in _new_entries(before, after) if entry.startswith(case)
    }
    # The named folder and the parents it needed, and nothing else.
    parents = {"/".join(expected.split("/")[:n]) for n in range(1, expected.count("/") + 1)}
    outside = sorted(
        entry
        for entry in new
        if entry != expected and not entry.startswith(expected + "/") and entry not in parents
    )
    assert outside == []
    assert (root / case / expected / "plan.json").is_file()


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
def saved_result(seed_runs):
    """A saved plan result (plan.json) of the first recipe, for ``verify``."""
    stem = RECIPES[0].stem
    return seed_runs[_SEEDS[0]][stem].work / stem / "plan.json"


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
