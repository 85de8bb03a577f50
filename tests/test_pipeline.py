"""The pipeline runs each stage once, so every number on a sheet comes from one place.

These are consistency checks between the commands' outputs (plan.json, the answer key and
``planner simulate``): the same quantity must be the same number wherever it is printed.
They are regression checks of our own design, not outside references.
"""

from __future__ import annotations

import ast
import json
import re
import tomllib
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]
DEFAULT = ROOT / "planner" / "data" / "default.toml"
COVERAGE_95 = 1.960  # JCGM 100:2008, Table G.1: k for a 95 % interval of a normal distribution


def _run(*args: str) -> str:
    result = runner.invoke(app, list(args), catch_exceptions=False)
    assert result.exit_code in (0, 1), result.output
    return result.stdout


def _with_blanks(tmp_path: Path, blanks: int) -> Path:
    text = DEFAULT.read_text(encoding="utf-8")
    assert "blanks" not in tomllib.loads(text)["design"]
    text = text.replace("[design]\n", f"[design]\nblanks = {blanks}\n", 1)
    path = tmp_path / f"blanks-{blanks}.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module", params=["default", "three-blanks"])
def documents(request, tmp_path_factory):
    if request.param == "default":
        args: tuple[str, ...] = ()
    else:
        args = (str(_with_blanks(tmp_path_factory.mktemp("plan"), 3)),)
    plan = json.loads(_run("plan", *args, "--format", "json"))
    simulated = json.loads(
        _run("simulate", *args, "--trials", "200", "--seed", "1", "--format", "json")
    )
    return plan, simulated


def test_every_u_absorbance_is_the_first_order_one_simulate_reports(documents):
    plan, simulated = documents
    first_order = {m["id"]: m["gum_u_absorbance"] for m in simulated["mixtures"]}
    assert set(first_order) == {m["id"] for m in plan["mixtures"]}
    for mixture in plan["mixtures"]:
        assert mixture["u_absorbance"] == pytest.approx(first_order[mixture["id"]], rel=1e-12)


def test_plan_uncertainties_equal_the_first_order_ones_of_simulate(documents):
    plan, simulated = documents
    gum = simulated["gum"]
    assert plan["prediction"]["u_epsilon"] == pytest.approx(gum["epsilon"]["u"], rel=0.01)
    assert plan["prediction"]["u_K"] == pytest.approx(gum["K"]["u"], rel=0.01)
    assert plan["prediction"]["epsilon"] == pytest.approx(gum["epsilon"]["value"], rel=1e-12)
    assert plan["prediction"]["K"] == pytest.approx(gum["K"]["value"], rel=1e-12)
    # The global fit, the analysis the default is designed for, likewise.
    fit, fit_gum = plan["global_fit_prediction"], gum["global_fit"]
    assert fit["u_epsilon"] == pytest.approx(fit_gum["epsilon"]["u"], rel=0.01)
    assert fit["u_K"] == pytest.approx(fit_gum["K"]["u"], rel=0.01)
    assert fit["K"] == pytest.approx(fit_gum["K"]["value"], rel=1e-12)


def test_three_blanks_are_all_in_the_prediction(tmp_path):
    # Averaging three blank readings lowers the blank's share of u(eps): a plan that used one
    # blank in its prediction (and three in simulate) reported a larger u(eps).
    one = json.loads(_run("plan", str(_with_blanks(tmp_path, 1)), "--format", "json"))
    three = json.loads(_run("plan", str(_with_blanks(tmp_path, 3)), "--format", "json"))
    assert three["prediction"]["u_epsilon"] < one["prediction"]["u_epsilon"]


def test_answer_key_reading_ranges_are_1_96_u_of_plan_json(tmp_path):
    out = tmp_path / "out"
    _run("plan", "--out", str(out), "--date", "2026-12-03", "--no-plots")
    plan = json.loads((out / "plan.json").read_text(encoding="utf-8"))
    key = (out / "answer-key.md").read_text(encoding="utf-8")
    for mixture in plan["mixtures"]:
        a, u = mixture["absorbance"], mixture["u_absorbance"]
        if mixture["role"] == "blank":
            # A blank's window is said as a tolerance around its reading (it reaches below 0).
            assert f"{mixture['id']} {a:.3f} ± {COVERAGE_95 * u:.3f}" in key
            continue
        low, high = a - COVERAGE_95 * u, a + COVERAGE_95 * u
        row = re.search(rf"\| Reading of {mixture['id']} \| (-?[0-9.]+) \| (-?[0-9.]+) \|", key)
        assert row is not None, mixture["id"]
        assert row.group(1) == f"{low:.3f}"
        assert row.group(2) == f"{high:.3f}"


# ---------------------------------------------------------------------------------------------
# The layers: no package imports one above it, and design does not import predict.
# ---------------------------------------------------------------------------------------------

# Rank of each unit of the package: a module may import units of its own rank or below only.
_RANKS = {
    "errors": 0,
    "records": 0,
    "inputs": 1,
    "chem": 2,
    "lab": 2,
    "result": 3,
    "forward": 3,
    "analysis": 3,
    "design": 4,
    "verify": 4,
    "verify_prediction": 4,
    "verify_global_fit": 4,
    "predict": 4,
    "pipeline": 5,
    "fileio": 5,
    "planfile": 5,
    "resultfile": 6,
    "readings": 6,
    "report": 7,
    "cli": 8,
    "__init__": 8,
    "__main__": 9,
}
# Pairs of the same rank that must not import each other, in either direction.
_APART = {
    ("design", "predict"),
    ("design", "verify"),
    ("verify", "predict"),
    ("design", "verify_prediction"),
    ("verify_prediction", "predict"),
    ("design", "verify_global_fit"),
    ("verify_global_fit", "predict"),
}


def _unit(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "__init__"


def _imports():
    for path in sorted((ROOT / "planner").rglob("*.py")):
        relative = path.relative_to(ROOT).with_suffix("")
        unit = relative.parts[1] if len(relative.parts) > 1 else "__init__"
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names: list[str] = []
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names = [node.module]
            elif isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            for name in names:
                if name == "planner" or name.startswith("planner."):
                    yield str(relative), unit, _unit(name)


def test_no_unit_imports_one_above_it():
    upward = [
        f"{where} ({unit}) imports {target}"
        for where, unit, target in _imports()
        if target != unit and _RANKS[target] > _RANKS[unit]
    ]
    assert upward == []


def test_design_verify_and_predict_do_not_import_each_other():
    crossing = [
        f"{where} imports {target}"
        for where, unit, target in _imports()
        if (unit, target) in _APART or (target, unit) in _APART
    ]
    assert crossing == []


# ---------------------------------------------------------------------------------------------
# Never a meaningless number
# ---------------------------------------------------------------------------------------------


def test_a_dominant_one_to_two_product_turns_the_plan_to_the_global_fit():
    # In this recipe Fe(SCN)2+ dominates, so the 1:1 all-bound expression gave a mean K of
    # about -2355 L/mol (and negative K for two tests) on the answer key. The plan now says the
    # all-bound analysis does not apply, designs for the global fit, and withholds the
    # all-bound numbers.
    plan = json.loads(
        _run(
            "plan",
            str(ROOT / "recipes" / "iron-thiocyanate-ligand-excess.toml"),
            "--format",
            "json",
        )
    )
    checks = {c["name"]: c for c in plan["checks"]}
    assert checks["analysis"]["status"] == "warn"
    assert "Fe(SCN)2+" in checks["analysis"]["detail"]
    assert "global fit" in checks["analysis"]["detail"]
    assert checks["prediction-meaningful"]["status"] == "pass"
    assert "withheld" in checks["prediction-meaningful"]["detail"]
    assert plan["prediction"] is None


def test_a_plan_asked_for_the_all_bound_analysis_fails_when_its_numbers_mean_nothing():
    from planner.pipeline import _prediction_check
    from planner.result import GlobalFitPrediction, Prediction

    negative = Prediction(
        epsilon=1500.0,
        u_epsilon=10.0,
        K=-2355.0,
        u_K=300.0,
        K_bias_from_assumption=-25.0,
        K_true=98.0,
        epsilon_true=4700.0,
    )
    fitted = GlobalFitPrediction(epsilon=4700.0, u_epsilon=120.0, K=98.0, u_K=3.6)
    kept, fit, (check,) = _prediction_check(negative, fitted, "all-bound")
    assert (kept, fit, check.status) == (None, fitted, "fail")
    kept, fit, (check,) = _prediction_check(negative, fitted, "global-fit")
    assert (kept, fit, check.status) == (None, fitted, "pass")
    bad_fit = GlobalFitPrediction(epsilon=4700.0, u_epsilon=120.0, K=98.0, u_K=80.0)
    kept, fit, (check,) = _prediction_check(None, bad_fit, "global-fit")
    assert (fit, check.status) == (None, "fail")
    assert "low end of its 95 % range of K" in check.detail


def test_meaningless_numbers_names_each_problem():
    from planner.pipeline import meaningless_numbers
    from planner.result import Prediction

    good = Prediction(
        epsilon=4500.0,
        u_epsilon=30.0,
        K=100.0,
        u_K=3.0,
        K_bias_from_assumption=0.02,
        K_true=98.0,
        epsilon_true=4700.0,
        K_per_test=(99.0, 101.0),
        u_K_per_test=(4.0, 5.0),
        epsilon_ci95=(4441.2, 4558.8),
        K_ci95=(94.1, 105.9),
        K_per_test_ci95=((91.2, 106.8), (91.2, 110.8)),
    )
    assert meaningless_numbers(good) == []
    import dataclasses

    bad = dataclasses.replace(
        good, K_per_test=(99.0, -15.0), K_ci95=(-3.0, 203.0), u_epsilon=float("nan")
    )
    problems = meaningless_numbers(bad)
    assert len(problems) == 3
    assert any("test 2" in p for p in problems)
    assert any("range of K" in p for p in problems)
    assert any("u(eps)" in p for p in problems)
