"""Command line: exit codes, stdout/stderr separation, JSON documents, error messages."""

from __future__ import annotations

import errno
import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from planner.cli import app
from tests.conftest import DEFAULT_OUT_DATE

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]


def run(*args: str):
    return runner.invoke(app, list(args), catch_exceptions=False)


def test_no_arguments_shows_help():
    result = run()
    assert "check" in result.output
    assert "plan" in result.output


def test_check_worked_example_json():
    # Issue acceptance: K = 98 L/mol (de Berg, Maeder and Clifford 2016), 0.1 mol/L excess,
    # 1.5e-4 mol/L limiting, 2 % tolerance: bound fraction about 0.907 (hand-solved quadratic
    # in tests/chem/test_assumption.py), verdict insufficient, minimum excess
    # 0.98*1.5e-4 + 0.98/(98*0.02) = 0.500147 mol/L.
    result = run(
        "check",
        "--k",
        "98",
        "--excess",
        "0.1",
        "--limiting",
        "1.5e-4",
        "--tolerance",
        "0.02",
        "--format",
        "json",
    )
    assert result.exit_code == 1
    document = json.loads(result.stdout)
    assert document["bound_fraction"] == pytest.approx(0.907, abs=5e-4)
    assert document["verdict"] == "insufficient"
    assert document["min_excess_M"] == pytest.approx(0.500147, rel=1e-6)
    assert document["assumption_error"] == pytest.approx(1 - document["bound_fraction"])


def test_check_text_explains_why():
    result = run(
        "check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4", "--tolerance", "0.02"
    )
    assert result.exit_code == 1
    text = " ".join(result.stdout.split())
    assert "free excess" in text
    assert "not the ratio" in text
    assert "low" in text  # the molar absorptivity bias


def test_check_out_of_practical_reach_is_said_plainly():
    result = run(
        "check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4", "--tolerance", "0.01"
    )
    assert "Out of practical reach" in " ".join(result.stdout.split())


def test_check_sufficient_excess_exits_0():
    result = run(
        "check", "--k", "1e5", "--excess", "0.01", "--limiting", "1e-4", "--format", "json"
    )
    assert result.exit_code == 0
    assert json.loads(result.stdout)["verdict"] == "ok"


@pytest.mark.parametrize(
    ("args", "field"),
    [
        (["--k", "0", "--excess", "0.1", "--limiting", "1e-4"], "--k"),
        (["--k", "-3", "--excess", "0.1", "--limiting", "1e-4"], "--k"),
        (["--k", "nan", "--excess", "0.1", "--limiting", "1e-4"], "--k"),
        (["--k", "1e308", "--excess", "0.1", "--limiting", "1e-4"], "--k"),
        (["--k", "98", "--excess", "-0.1", "--limiting", "1e-4"], "--excess"),
        (["--k", "98", "--excess", "inf", "--limiting", "1e-4"], "--excess"),
        (["--k", "98", "--excess", "1e308", "--limiting", "1e-4"], "--excess"),
        (["--k", "98", "--excess", "0.1", "--limiting", "-1e-4"], "--limiting"),
        (["--k", "98", "--excess", "0.1", "--limiting", "-inf"], "--limiting"),
        (
            ["--k", "98", "--excess", "0.1", "--limiting", "1e-4", "--tolerance", "1.5"],
            "--tolerance",
        ),
        (["--k", "98", "--excess", "0.1", "--limiting", "1e-4", "--tolerance", "0"], "--tolerance"),
        (
            ["--k", "98", "--excess", "0.1", "--limiting", "1e-4", "--tolerance", "nan"],
            "--tolerance",
        ),
    ],
)
def test_check_bad_values_exit_2_naming_the_option(args, field):
    # Issue 9: the message names the option as typed (--k, not the core's argument K) and
    # the fix.
    result = run("check", *args)
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert message.startswith(f"error: {field}: ")
    assert "Fix:" in message
    assert result.stdout == ""
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("excess", ["0", "-0", "0.0", "1e-300"])
def test_check_with_no_excess_explains_instead_of_crashing(excess):
    # Issue 9: --excess 0 divided by the bound fraction 0 in the text report (exit 3). With
    # no excess nothing is bound: f = K[M]free / (1 + K[M]free) = 0 (Connors 1987, eq. 2.7).
    result = run("check", "--k", "98", "--excess", excess, "--limiting", "0.5")
    assert result.exit_code == 1, result.stderr
    assert "Traceback" not in result.stderr
    text = " ".join(result.stdout.split())
    assert "none of the limiting reagent is bound" in text
    assert "roles are swapped" in text  # the excess is below the limiting total
    assert "inf" not in text
    assert "-0 " not in text


def test_check_json_with_minus_zero_excess_reports_zero():
    result = run("check", "--k", "98", "--excess", "-0", "--limiting", "0.5", "--format", "json")
    assert result.exit_code == 1
    document = json.loads(result.stdout)
    assert document["bound_fraction"] == 0.0
    assert str(document["excess_M"]) == "0.0"  # not -0.0


# Issue 11, item 7: a fix the check offers is solved for and works when applied. The old text
# printed the minimum to four digits, rounded to nearest: 0.500147 mol/L became "0.5001",
# which falls short, and "accept a tolerance of 9.27 %" was below the 9.2707 % error.

_WORKED = ["check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4", "--tolerance", "0.02"]


def _number_after(words: str, text: str) -> float:
    import re

    text = " ".join(text.replace("│", " ").split())  # the panel's border, where lines wrap
    found = re.search(re.escape(words) + r" ([0-9.e+-]+)", text)
    assert found, text
    return float(found.group(1))


def test_check_suggested_excess_passes_when_applied():
    text = " ".join(run(*_WORKED).stdout.split())
    excess = _number_after("Raise the total excess to at least", text)
    # Hand figure: 0.98*1.5e-4 + 0.98/(98*0.02) = 0.500147 mol/L; rounded up, 0.5002.
    assert excess == pytest.approx(0.5002)
    applied = [*_WORKED]
    applied[applied.index("--excess") + 1] = repr(excess)
    assert run(*applied).exit_code == 0


def test_check_suggested_tolerance_passes_when_applied():
    text = " ".join(run(*_WORKED).stdout.split())
    percent = _number_after("or accept a tolerance of", text)
    applied = [*_WORKED]
    applied[applied.index("--tolerance") + 1] = repr(percent / 100)
    assert run(*applied).exit_code == 0


def test_check_impossible_excess_is_said_to_be_impossible():
    # 15 mol/L limiting, K = 98, 2 %: the smallest excess is 0.98*15 + 0.5 = 15.2 mol/L,
    # above the 10 mol/L a dissolved reagent reaches (common practice): no raise is offered.
    result = run("check", "--k", "98", "--excess", "0.1", "--limiting", "15")
    assert result.exit_code == 1
    text = " ".join(result.stdout.split())
    assert "No excess fixes this" in text
    assert "15.2 mol/L" in text
    assert "Raise the total excess" not in text
    document = json.loads(
        run("check", "--k", "98", "--excess", "0.1", "--limiting", "15", "--format", "json").stdout
    )
    assert document["suggested_excess_M"] is None
    assert document["excess_reachable"] is False


@pytest.mark.parametrize(("option", "value"), [("--excess", "500"), ("--limiting", "25")])
def test_check_concentration_beyond_any_stock_exits_2(option, value):
    # Issue 11, item 9: more than the 20 mol/L a plan's stock may hold is a typo, not an
    # answer (the old range went to 1e6 mol/L and answered "OK").
    args = {"--k": "98", "--excess": "0.1", "--limiting": "1e-4", option: value}
    result = run("check", *[x for pair in args.items() for x in pair])
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert message.startswith(f"error: {option}: ")
    assert "20 mol/L" in message
    assert "Fix:" in message


_CHECK_VALUES = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1e-300, 5e-324, 1e308, 20.0, 20.000001, 10.0, 1e60, 1e-60]),
    st.floats(1e-6, 20.0),
)


@settings(max_examples=60, deadline=None)
@given(k=_CHECK_VALUES, excess=_CHECK_VALUES, limiting=_CHECK_VALUES, tolerance=_CHECK_VALUES)
def test_check_answers_every_input_and_its_fix_works(k, excess, limiting, tolerance):
    # Issue 11, item 9: a result (0 or 1) or a clear error naming the option (2), never a
    # traceback; and a suggested excess, applied, passes.
    values = {"--k": k, "--excess": excess, "--limiting": limiting, "--tolerance": tolerance}
    args = ["check", *[x for o, v in values.items() for x in (o, repr(v))], "--format", "json"]
    result = runner.invoke(app, args, catch_exceptions=False)
    assert result.exit_code in (0, 1, 2)
    assert "Traceback" not in result.stderr + result.stdout
    if result.exit_code == 2:
        message = " ".join(result.stderr.split())
        assert any(message.startswith(f"error: {o}: ") for o in values), message
        assert "Fix:" in message
        return
    document = json.loads(result.stdout)
    assert (document["verdict"] == "ok") == (result.exit_code == 0)
    if document["suggested_excess_M"] is not None:
        args[args.index("--excess") + 1] = repr(document["suggested_excess_M"])
        assert runner.invoke(app, args, catch_exceptions=False).exit_code == 0


def test_plan_default_json_has_every_contract_key():
    result = run("plan", "--format", "json")
    assert result.exit_code == 0, result.stderr
    document = json.loads(result.stdout)
    # DESIGN section 5 keys.
    for key in ("schema", "title", "inputs", "mixtures", "totals_mL", "checks", "prediction"):
        assert key in document
    assert document["schema"] == "planner.plan/2"
    for key in ("per_bench", "session", "to_prepare"):
        assert key in document["totals_mL"]
    for key in ("epsilon", "u_epsilon", "K", "u_K", "K_bias_from_assumption"):
        assert key in document["prediction"]
    mixture_keys = {
        "id",
        "role",
        "total_volume_mL",
        "additions",
        "initial_M",
        "equilibrium_M",
        "absorbance",
        "u_absorbance",
        "bound_fraction",
        "ionic_strength_M",
    }
    for mixture in document["mixtures"]:
        assert mixture_keys <= set(mixture)
        for addition in mixture["additions"]:
            assert {"stock", "volume_mL", "devices", "order"} <= set(addition)


def test_plan_failed_check_exits_1_with_failures_first(tmp_path):
    # The default's shelf for the all-bound analysis (the default itself plans the global
    # fit, which does not assume the standards all bound).
    text = (ROOT / "recipes" / "iron-thiocyanate-tubes.toml").read_text()
    # Demand an unattainable tolerance: the standards' assumption check must fail.
    broken = text.replace("assumption_tolerance = 0.05", "assumption_tolerance = 0.001")
    path = tmp_path / "strict.toml"
    path.write_text(broken)
    result = run("plan", str(path), "--format", "json")
    assert result.exit_code == 1
    checks = json.loads(result.stdout)["checks"]
    assert checks[0]["status"] == "fail"
    names = [c["name"] for c in checks if c["status"] == "fail"]
    assert "limiting-reagent-assumption" in names
    detail = next(c["detail"] for c in checks if c["name"] == "limiting-reagent-assumption")
    # 0.1 % needs about 10.2 mol/L of free iron(III): no stock makes that (issue 11, item 7:
    # the old text still asked for a stronger stock).
    assert "Fix: impossible on this shelf" in detail
    assert "tolerance of" in detail


def test_plan_unreadable_file_exits_2(tmp_path):
    path = tmp_path / "typo.toml"
    path.write_text(
        (ROOT / "planner" / "data" / "default.toml")
        .read_text()
        .replace("path_length_cm", "path_lenght_cm")
    )
    result = run("plan", str(path))
    assert result.exit_code == 2
    assert "instrument.path_lenght_cm" in result.stderr
    assert "Traceback" not in result.stderr


def test_plan_missing_file_exits_2(tmp_path):
    result = run("plan", str(tmp_path / "absent.toml"))
    assert result.exit_code == 2
    assert "absent.toml" in result.stderr


def test_plan_out_writes_folder_and_refuses_non_empty(tmp_path, default_out):
    # The session's `plan --out` folder of the default plan, copied: as `plan --out` left it.
    out = tmp_path / "sheets"
    shutil.copytree(default_out, out)
    saved = json.loads((out / "plan.json").read_text())
    assert saved["schema"] == "planner.plan/2"
    assert (out / "mixtures.csv").exists()
    again = run("plan", "--out", str(out))
    assert again.exit_code == 2
    assert "--force" in again.stderr
    forced = run("plan", "--out", str(out), "--force", "--date", "2026-12-02", "--no-plots")
    assert forced.exit_code == 0
    # The folder carries the marker that lets the next --force replace it, and it does.
    assert (out / ".planner-output").read_text().startswith("# Written by planner")
    again = run("plan", "--out", str(out), "--force", "--date", "2026-12-03", "--no-plots")
    assert again.exit_code == 0
    assert "2026-12-03" in (out / "prep-sheet.md").read_text()


def test_verify_round_trip_and_hand_edit(tmp_path, default_out):
    good = run("verify", str(default_out / "plan.json"))
    assert good.exit_code == 0, good.stdout
    document = json.loads((default_out / "plan.json").read_text())
    # Hand edit: the first standard's limiting-reagent addition now claims a 5 mL transfer
    # pipette, which cannot deliver its volume (the plan's own recipe, edited).
    standard = next(m for m in document["mixtures"] if m["role"] == "standard")
    addition = next(a for a in standard["additions"] if a["stock"] == "thiocyanate")
    addition["devices"] = ["transfer-pipette-5mL"]
    edited = tmp_path / "edited.json"
    edited.write_text(json.dumps(document))
    result = run("verify", str(edited), "--format", "json")
    assert result.exit_code == 1
    failed = {
        c["name"]: c["detail"] for c in json.loads(result.stdout)["checks"] if c["status"] == "fail"
    }
    assert "deliverable-volumes" in failed
    assert standard["id"] in failed["deliverable-volumes"]


def test_verify_unreadable_json_exits_2(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text("{not json")
    result = run("verify", str(path))
    assert result.exit_code == 2
    assert "Traceback" not in result.stderr


def _everything(folder: Path) -> dict[str, bytes | None]:
    """Every entry under folder: file bytes, or None for a folder."""
    return {
        path.relative_to(folder).as_posix(): None if path.is_dir() else path.read_bytes()
        for path in sorted(folder.rglob("*"))
    }


_WRITERS = {
    "plan": ["plan", "plan.toml", "--date", "2026-12-02"],
    "simulate": ["simulate", "plan.toml", "--trials", "300"],
    "variants": ["variants", "plan.toml", "--sections", "1", "--seed", "1"],
}


@pytest.mark.parametrize("command", sorted(_WRITERS))
def test_force_never_deletes_the_users_files_in_the_current_folder(tmp_path, monkeypatch, command):
    # Issue 9: "planner plan plan.toml --out . --force" in a folder holding the plan file and a
    # document deleted both.
    work = tmp_path / "work"
    work.mkdir()
    (work / "plan.toml").write_bytes((ROOT / "recipes" / "copper-ligand-excess.toml").read_bytes())
    (work / "thesis.odt").write_bytes(b"years of work")
    monkeypatch.chdir(work)
    before = _everything(tmp_path)
    result = run(*_WRITERS[command], "--out", ".", "--force")
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert "--out:" in message
    assert "the current folder" in message
    assert "Fix:" in message
    assert "Traceback" not in result.stderr
    assert _everything(tmp_path) == before


def test_force_refuses_a_users_folder_named_through_dotdot(tmp_path, monkeypatch):
    # Issue 9: "--out v/sub/.. --force" replaced v itself, the user's folder.
    folder = tmp_path / "v"
    (folder / "sub").mkdir(parents=True)
    (folder / "data.csv").write_text("1,2\n")
    monkeypatch.chdir(tmp_path)
    before = _everything(tmp_path)
    result = run("plan", "--out", "v/sub/..", "--force", "--date", "2026-12-02")
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert "--out:" in message
    assert ".planner-output" in message
    assert _everything(tmp_path) == before


def test_force_refuses_the_folder_holding_the_plan_file(tmp_path, default_out):
    inputs = tmp_path / "inputs"
    shutil.copytree(default_out, inputs)  # a `plan --out` folder
    plan = inputs / "mine.toml"  # saved by the user inside a planner output folder
    plan.write_bytes((ROOT / "planner" / "data" / "default.toml").read_bytes())
    before = _everything(tmp_path)
    result = run("plan", str(plan), "--out", str(inputs), "--force", "--date", "2026-12-02")
    assert result.exit_code == 2
    assert "holds the plan file" in " ".join(result.stderr.split())
    assert _everything(tmp_path) == before


def test_variants_checks_the_folder_before_designing(tmp_path, monkeypatch):
    import planner.design.variants

    def not_before_the_check(*args, **kwargs):
        raise AssertionError("designed before the output folder was checked")

    monkeypatch.setattr(planner.design.variants, "design_variants", not_before_the_check)
    taken = tmp_path / "taken"
    taken.mkdir()
    (taken / "notes.txt").write_text("mine")
    recipe = str(ROOT / "recipes" / "copper-ligand-excess.toml")
    result = run("variants", recipe, "--sections", "2", "--seed", "1", "--out", str(taken))
    assert result.exit_code == 2
    assert "--out:" in result.stderr


def test_interrupt_exits_130_with_a_line_and_no_traceback(monkeypatch):
    import planner.pipeline

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(planner.pipeline, "design_plan", interrupted)
    result = run("plan")
    # 128 + SIGINT (2), the status a shell gives a command stopped by Ctrl-C.
    assert result.exit_code == 130
    assert "SIGINT" in result.stderr
    assert "Traceback" not in result.stderr
    assert len(result.stderr.splitlines()) == 1


def test_init_on_a_full_disk_leaves_no_file(tmp_path, monkeypatch):
    # Issue 9: "planner init" on a full disk left an empty file behind.
    from planner.report import outdir

    def full_disk(descriptor, data):
        os.write(descriptor, data[:100])
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(outdir, "_write_fd", full_disk)
    target = tmp_path / "plan.toml"
    result = run("init", str(target))
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert str(target) in message
    assert os.strerror(errno.ENOSPC) in message
    assert "Traceback" not in result.stderr
    assert list(tmp_path.iterdir()) == []


def _file_size_limit():
    # In the child before exec: files may grow to 200 bytes at most, and a write beyond that
    # fails with EFBIG instead of sending SIGXFSZ (POSIX setrlimit, RLIMIT_FSIZE): a real
    # failure half-way through the file, as on a full disk, with no code of ours replaced.
    import resource
    import signal

    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, (200, 200))


def test_init_failing_half_way_leaves_no_file_in_a_real_process(tmp_path):
    import subprocess
    import sys

    done = subprocess.run(
        [sys.executable, "-m", "planner", "init", "plan.toml"],
        cwd=tmp_path,
        env={**os.environ, "PYTHONPATH": str(ROOT), "PYTHONDONTWRITEBYTECODE": "1"},
        preexec_fn=_file_size_limit,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 2, done.stderr
    assert os.strerror(errno.EFBIG) in " ".join(done.stderr.split())
    assert "Traceback" not in done.stderr
    assert list(tmp_path.iterdir()) == []


def test_init_writes_a_plan_that_plans_and_refuses_overwrite(tmp_path):
    target = tmp_path / "starter.toml"
    assert run("init", str(target)).exit_code == 0
    assert target.read_text().startswith("# Starter plan")
    assert run("plan", str(target), "--format", "json").exit_code in (0, 1)
    again = run("init", str(target))
    assert again.exit_code == 2
    assert "not overwriting" in again.stderr


def test_quiet_prints_nothing_but_keeps_exit_status(tmp_path):
    assert run("plan", "--quiet").stdout == ""
    strict = tmp_path / "strict.toml"
    strict.write_text(
        (ROOT / "recipes" / "iron-thiocyanate-tubes.toml")
        .read_text()
        .replace("assumption_tolerance = 0.05", "assumption_tolerance = 0.001")
    )
    result = run("plan", str(strict), "-q")
    assert result.exit_code == 1
    assert result.stdout == ""


def test_no_color_is_honoured():
    # NO_COLOR (no-color.org): no colour escape codes even when colour is forced.
    import re

    args = ["check", "--k", "98", "--excess", "0.1", "--limiting", "1e-4"]
    coloured = runner.invoke(app, args, env={"FORCE_COLOR": "1"})
    plain = runner.invoke(app, args, env={"FORCE_COLOR": "1", "NO_COLOR": "1"})
    colour_code = re.compile(r"\x1b\[[0-9;]*3[0-9]")
    assert colour_code.search(coloured.stdout)
    assert not colour_code.search(plain.stdout)


def test_terminal_summary_fits_80_columns():
    result = runner.invoke(app, ["plan"], env={"COLUMNS": "80"})
    assert max(len(line) for line in result.stdout.splitlines()) <= 80


def test_an_output_path_with_rich_markup_is_printed_literally(tmp_path, monkeypatch):
    # rich read "[/]" in the folder's name as markup: the folder was written, then exit 3.
    monkeypatch.chdir(tmp_path)
    result = run("plan", "--out", "x[/]y", "--date", "2026-12-03")
    assert result.exit_code == 0, result.stderr
    assert "wrote x[/]y/" in result.stderr
    assert (tmp_path / "x[/]y" / "plan.json").is_file()


@pytest.mark.parametrize("command", ["plan", "variants"])
@pytest.mark.parametrize(
    ("date", "problem"),
    [
        ("notadate", "not an ISO date"),
        ("20261202", "not an ISO date"),  # fromisoformat alone accepts it
        ("2026-W49-3", "not an ISO date"),
        ("2026-02-30", "no such day"),
        ("2026-13-01", "no such day"),
        ("2026-12-02x", "not an ISO date"),
    ],
)
def test_date_must_be_an_iso_date(tmp_path, command, date, problem):
    # Issue 9: --date was printed on the sheets as given, whatever it was.
    recipe = str(ROOT / "planner" / "data" / "default.toml")
    args = {
        "plan": ["plan", "--out", str(tmp_path / "out"), "--date", date],
        "variants": [
            "variants",
            recipe,
            "--sections",
            "1",
            "--seed",
            "1",
            "--out",
            str(tmp_path / "out"),
            "--date",
            date,
        ],
    }[command]
    result = run(*args)
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert message.startswith("error: --date: "), message
    assert problem in message
    assert not (tmp_path / "out").exists()


def test_a_valid_date_is_printed_on_the_sheets(default_out):
    # The session's folder: `plan --out DIR --date 2028-02-29 -q`, a leap day.
    assert DEFAULT_OUT_DATE == "2028-02-29"
    assert "Date: 2028-02-29" in (default_out / "prep-sheet.md").read_text(encoding="utf-8")


def test_text_output_survives_an_ascii_stream():
    # Issue 9: the summary prints × and ±; on a stream that cannot encode them (ASCII, as
    # PYTHONIOENCODING=ascii gives) the write raised UnicodeEncodeError, an internal error.
    ascii_runner = CliRunner(charset="ascii")
    result = ascii_runner.invoke(app, ["plan"], catch_exceptions=False)
    assert result.exit_code == 0, result.stderr
    assert "\\xd7" in result.stdout  # × (U+00D7) written as its escape
    assert "Traceback" not in result.stderr


def _python_m_planner(*args: str, env: dict[str, str] | None = None, timeout: float = 60):
    environment = {**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1", **(env or {})}
    return subprocess.run(
        [sys.executable, "-m", "planner", *args],
        env=environment,
        capture_output=True,
        timeout=timeout,
        check=False,
    )


@pytest.mark.parametrize(
    "env",
    [
        {"PYTHONIOENCODING": "ascii"},
        {"PYTHONIOENCODING": "ascii:strict"},  # stderr strict too
        {"PYTHONIOENCODING": "latin-1", "LC_ALL": "C"},
    ],
)
def test_whole_process_output_survives_a_narrow_encoding(tmp_path, env):
    # Titles and names may hold anything: ⁺ (U+207A) and → (U+2192) are in neither ASCII
    # nor Latin-1 (ISO/IEC 8859-1), ³ and × are in Latin-1 only.
    default = (ROOT / "planner" / "data" / "default.toml").read_text(encoding="utf-8")
    good = tmp_path / "good.toml"
    good.write_text(default.replace('title = "', 'title = "Fe³⁺ → ×2 ', 1), encoding="utf-8")
    bad = tmp_path / "bad.toml"
    bad.write_text('title = "x"\n[reaction]\ncomponentz = ["L⁻"]\n', encoding="utf-8")
    encoding = env["PYTHONIOENCODING"].split(":")[0]
    for path, code in ((good, 0), (bad, 2)):
        done = _python_m_planner("plan", str(path), env=env)
        assert done.returncode == code, done.stderr.decode("latin-1")[-2000:]
        assert b"Traceback" not in done.stderr
        done.stdout.decode(encoding)  # the stream's own encoding, escapes for the rest
        if code == 0:
            assert b"Fe\\u207a" in done.stdout.replace(b"\xb3", b"").replace(b"\\xb3", b"")
    assert b"componentz" in done.stderr  # the error message itself got through
    assert b"\\u207b" in done.stderr  # L⁻ (U+207B) as its escape


# Issue 9, "done when": each of these answers within seconds with exit 0, 1 or 2 and no
# traceback (whole processes, so a hang shows as a timeout).


def test_done_when_check_with_zero_excess():
    done = _python_m_planner("check", "--k", "98", "--excess", "0", "--limiting", "0.5")
    assert done.returncode in (0, 1, 2)
    assert b"Traceback" not in done.stderr + done.stdout


def test_done_when_simulate_with_a_billion_trials():
    started = time.monotonic()
    done = _python_m_planner("simulate", "--trials", "1000000000", timeout=30)
    assert time.monotonic() - started < 30
    assert done.returncode == 2
    assert b"Traceback" not in done.stderr + done.stdout
    message = b" ".join(done.stderr.split())
    assert b"--trials" in message
    assert b"10000000" in message  # the largest allowed value


def test_done_when_plan_of_a_fifo(tmp_path):
    fifo = tmp_path / "plan.toml"
    os.mkfifo(fifo)  # nobody ever writes to it: reading it would wait forever
    done = _python_m_planner("plan", str(fifo), timeout=20)
    assert done.returncode == 2
    assert b"Traceback" not in done.stderr + done.stdout
    assert b"FIFO" in done.stderr


@pytest.mark.parametrize("special", ["fifo", "/dev/zero", "directory"])
def test_verify_refuses_special_files(tmp_path, special):
    # Issue 9: the saved-result reader is the plan-file reader; /dev/zero was read until
    # memory ran out and a FIFO blocked forever.
    if special == "fifo":
        path = tmp_path / "plan.json"
        os.mkfifo(path)
    elif special == "directory":
        path = tmp_path
    else:
        path = Path(special)
    result = run("verify", str(path))
    assert result.exit_code == 2
    message = " ".join(result.stderr.split())
    assert "not a regular file" in message
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("command", ["plan", "analyse", "simulate", "variants", "verify", "check"])
def test_help_flows_each_paragraph_instead_of_breaking_lines_mid_sentence(command):
    # The docstrings wrap at 100 columns in the source; --help must rewrap them to the
    # terminal, not keep those breaks (an 80-column terminal showed "spread across" alone).
    from planner.cli import app as planner_app

    info = next(c for c in planner_app.registered_commands if c.callback.__name__ == command)
    assert info.help
    for paragraph in info.help.split("\n\n"):
        assert "\n" not in paragraph, paragraph


@pytest.mark.parametrize("command", ["plan", "analyse", "simulate", "variants", "verify", "check"])
def test_help_keeps_every_unit_in_square_brackets(command):
    # Rich reads "[mol/L]" as a markup tag and drops it: `planner check --help` printed
    # "Total concentration of the reagent in excess , 0 to 20". Every bracketed unit an
    # option's help text gives must reach the screen.
    import re

    import typer.main

    from planner.cli import app as planner_app

    click_command = typer.main.get_command(planner_app).commands[command]
    shown = " ".join(
        CliRunner().invoke(planner_app, [command, "--help"], env={"COLUMNS": "300"}).output.split()
    )
    units = [
        unit
        for param in click_command.params
        for unit in re.findall(
            r"\[[^\]\[]+\]", (getattr(param, "help", None) or "").replace("\\[", "[")
        )
    ]
    for unit in units:
        assert unit in shown, (command, unit)


def test_only_the_command_line_process_collects_garbage_less_often():
    # Importing the command line (as the library API and the tests do) keeps the
    # interpreter's collector thresholds; the console entry point raises the first one.
    code = (
        "import gc, sys\n"
        "default = gc.get_threshold()\n"
        "import planner.cli\n"
        "imported = gc.get_threshold()\n"
        "sys.argv = ['planner', '--help']\n"
        "try:\n"
        "    planner.cli.main()\n"
        "except SystemExit:\n"
        "    pass\n"
        "print(default == imported, gc.get_threshold()[0], gc.get_threshold()[1:] == default[1:])"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.split()[-3:] == ["True", "100000", "True"]
