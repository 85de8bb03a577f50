"""planner simulate: exit codes, stdout and stderr apart, the JSON document, the output folder.

Small trial counts keep the file fast; the science is tested in tests/predict/.
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]
SVG = "{http://www.w3.org/2000/svg}"  # the SVG namespace (W3C SVG 1.1)


def run(*args: str):
    return runner.invoke(app, list(args), catch_exceptions=False)


@pytest.fixture(scope="module")
def document():
    result = run("simulate", "--trials", "400", "--seed", "3", "--format", "json")
    assert result.exit_code == 0, result.stderr
    return json.loads(result.stdout)


def test_json_contract(document):
    # Issue 4 item 4: epsilon and K, each {analysis: {mean, sd, ci95}}, plus the bias.
    assert document["schema"] == "planner.simulate/2"
    for quantity in ("epsilon", "K"):
        assert set(document[quantity]) == {"all_bound", "global_fit"}
        for analysis in document[quantity].values():
            assert set(analysis) == {"mean", "sd", "ci95"}
            low, high = analysis["ci95"]
            assert low < analysis["mean"] < high
            assert analysis["sd"] > 0
    bias = document["K_bias_from_assumption"]
    assert bias == pytest.approx(document["K"]["all_bound"]["mean"] / document["K_true"] - 1)
    assert document["trials"] == 400
    assert document["seed"] == 3


def test_json_carries_the_budget(document):
    budget = document["gum"]["K"]
    assert budget["contributors"]
    shares = [row["share"] for row in budget["contributors"]]
    assert shares == sorted(shares, reverse=True)
    assert sum(shares) == pytest.approx(1.0)
    assert all(row["formula"] for row in budget["contributors"])
    assert {m["id"] for m in document["mixtures"]} >= {"B1", "S1", "T1"}


def test_same_seed_same_bytes():
    args = ("simulate", "--trials", "300", "--seed", "9", "--format", "json")
    first, second = run(*args), run(*args)
    assert first.stdout == second.stdout
    other = run("simulate", "--trials", "300", "--seed", "10", "--format", "json")
    assert json.loads(other.stdout)["K"] != json.loads(first.stdout)["K"]


def test_text_output():
    result = run("simulate", "--trials", "300")
    assert result.exit_code == 0, result.stderr
    for expected in ("all-bound", "global fit", "Uncertainty budget", "against the true K"):
        assert expected in result.stdout
    assert result.stderr == ""  # no progress bar below 20000 trials, nothing else either


def test_out_folder_with_histogram(tmp_path):
    target = tmp_path / "sim"
    result = run("simulate", "--trials", "300", "--seed", "1", "--out", str(target), "-q")
    assert result.exit_code == 0, result.stderr
    assert result.stdout == ""  # --quiet
    assert sorted(p.name for p in target.iterdir()) == [
        ".planner-output",  # the marker that lets --force replace the folder later
        "K-histogram.svg",
        "epsilon-histogram.svg",
        "simulation.json",
    ]
    for name in ("K-histogram.svg", "epsilon-histogram.svg"):
        root = ET.fromstring((target / name).read_bytes())  # well-formed XML (W3C SVG 1.1)
        assert root.tag == SVG + "svg"
    assert json.loads((target / "simulation.json").read_text())["trials"] == 300
    # Same seed, same images, byte for byte.
    again = tmp_path / "again"
    run("simulate", "--trials", "300", "--seed", "1", "--out", str(again), "-q")
    for path in target.iterdir():
        assert (again / path.name).read_bytes() == path.read_bytes(), path.name


def test_out_folder_not_empty_exits_2(tmp_path):
    (tmp_path / "keep.txt").write_text("x")
    result = run("simulate", "--trials", "300", "--out", str(tmp_path))
    assert result.exit_code == 2
    assert "--out" in result.stderr
    assert "Traceback" not in result.stderr


def test_recipe_file():
    result = run(
        "simulate",
        str(ROOT / "recipes" / "micro-piston.toml"),
        "--trials",
        "300",
        "--format",
        "json",
    )
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["K_true"] == pytest.approx(98.0, rel=1e-3)


def test_too_few_trials_is_a_usage_error():
    result = run("simulate", "--trials", "1")
    assert result.exit_code == 2
    assert "--trials" in result.stderr


def test_unreadable_plan_exits_2(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('title = "x"\n[reaction]\ncomponentz = []\n')
    result = run("simulate", str(bad), "--trials", "300")
    assert result.exit_code == 2
    assert "Traceback" not in result.stderr
    assert result.stdout == ""


@pytest.mark.parametrize(
    ("args", "option"),
    [
        (["--trials", "1000000000"], "--trials"),  # asked for 82 GiB before (issue 9)
        (["--trials", "10000001"], "--trials"),
        (["--trials", "1e9"], "--trials"),
        (["--seed", "-1"], "--seed"),  # numpy refuses negative seeds: exit 3 before
        (["--seed", str(2**32)], "--seed"),
        (["--seed", str(10**40)], "--seed"),
    ],
)
def test_out_of_range_arguments_exit_2_naming_the_option(args, option):
    result = run("simulate", *args)
    assert result.exit_code == 2
    assert option in result.stderr
    assert result.stdout == ""
    assert "Traceback" not in result.stderr


def test_the_largest_seed_is_accepted():
    result = run("simulate", "--trials", "20", "--seed", str(2**32 - 1), "--format", "json")
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["seed"] == 2**32 - 1


def test_no_screen_or_document_says_taught():
    # Issue 10: the two analyses are the all-bound analysis and the global fit everywhere.
    text = run("simulate", "--trials", "300").stdout
    document = run("simulate", "--trials", "300", "--format", "json").stdout
    for output in (text, document):
        assert "taught" not in output.lower()
        assert "exact" not in output.lower()
    assert '"all_bound"' in document
    assert '"global_fit"' in document


def test_a_global_fit_plan_withholds_the_all_bound_numbers_and_leads_with_the_fit():
    # The recipe where Fe(SCN)2+ dominates: the all-bound analysis would report a mean K near
    # zero with a 95 % range reaching below zero; the plan is designed for the global fit.
    recipe = str(ROOT / "recipes" / "iron-thiocyanate-ligand-excess.toml")
    result = run("simulate", recipe, "--trials", "300", "--seed", "5", "--format", "json")
    assert result.exit_code == 0, result.stderr
    document = json.loads(result.stdout)
    assert document["analysis"] == "global-fit"
    assert document["K"]["all_bound"] is None
    assert document["K_bias_from_assumption"] is None
    assert document["gum"]["K"] is None
    assert all(entry["all_bound"] is None for entry in document["K_per_test"])
    fit = document["gum"]["global_fit"]["K"]
    assert fit["value"] > 0
    assert fit["u"] > 0
    assert document["K"]["global_fit"]["ci95"][0] > 0
    text = run("simulate", recipe, "--trials", "300", "--seed", "5").stdout
    assert "its numbers are withheld" in text
    # No table row of the all-bound analysis (a row starts with the analysis, then numbers).
    assert not [line for line in text.splitlines() if line.strip().startswith("all-bound ")]
    assert "Uncertainty budget of K (global fit)" in text


def test_technique_compares_presets_side_by_side(tmp_path: Path) -> None:
    # The done criterion through the command: on the default plan the novice bench's
    # 95 % range of K is at least three times as wide as the calibrated bench's.
    out = tmp_path / "sim"
    result = run(
        "simulate",
        "--technique",
        "calibrated",
        "--technique",
        "novice",
        "--trials",
        "4000",
        "--format",
        "json",
        "--out",
        str(out),
    )
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    assert document["schema"] == "planner.simulate-techniques/1"
    assert set(document["techniques"]) == {"calibrated", "novice"}
    # The default is designed for the global fit: its range is the one the answer key gives.
    assert document["analysis"] == "global-fit"
    width = {
        name: entry["K"]["global_fit"]["ci95"][1] - entry["K"]["global_fit"]["ci95"][0]
        for name, entry in document["techniques"].items()
    }
    assert width["novice"] >= 3.0 * width["calibrated"]
    spread = document["techniques"]["calibrated"]["K_spread_all_bound"]
    assert spread["class_size"] == 30  # 3 sections x 10 benches of the default
    # No meaningless number (issue 11, rule 6): a preset whose all-bound K range reaches
    # K <= 0 has that analysis withheld (null), never printed.
    for entry in document["techniques"].values():
        bound = entry["K"]["all_bound"]
        assert bound is None or (bound["ci95"][0] > 0 and bound["sd"] > 0)
    svg = ET.fromstring((out / "K-histogram-by-technique.svg").read_bytes())
    assert svg.tag == SVG + "svg"
    assert (out / "techniques.json").is_file()


def test_technique_rejects_an_unknown_preset() -> None:
    result = runner.invoke(app, ["simulate", "--technique", "expert"])
    assert result.exit_code == 2


def test_json_splits_the_spread_by_class(document):
    # The stocks are one batch for the class (3 sections x 10 benches on the default): the
    # spread inside a class and of the class mean are reported apart; with 400 trials there
    # are 13 whole classes.
    spread = document["K_spread"]["all_bound"]
    assert spread["class_size"] == 30
    assert spread["classes"] == 400 // 30
    assert spread["bench_sd"] > 0
    assert spread["class_mean_sd"] > 0


def test_an_sd_set_by_a_few_far_benches_is_marked():
    # A normal spread has SD = (high - low) / (2 x 1.96) of its 95 % range (JCGM 100:2008,
    # G.1.3 coverage factor): 100 +- 19.6 gives SD 10, shown plain. An SD of 730 beside the
    # range 381-979 (what a normal spread of it would give: 153) is set by a few benches far
    # out, as the all-bound K of a test near full binding gives, and is marked.
    from planner.report.simulation import _heavy_tailed, _spread

    assert not _heavy_tailed(10.0, (80.4, 119.6))
    assert _spread(100.0, 10.0, (80.4, 119.6))[1] == "10"
    assert _heavy_tailed(730.0, (381.2, 978.9))
    assert _spread(541.0, 730.0, (381.2, 978.9))[1] == "730*"
    assert not _heavy_tailed(float("nan"), (1.0, 2.0))


def test_the_class_mean_bias_is_set_beside_the_answer_key_s_noise_free_one():
    # The answer key's all-bound bias is the noise-free one (the first-order prediction's K);
    # the virtual class's mean moves further where noise passes through the curvature of K.
    # The line gives both when they differ at three figures, and says they agree otherwise.
    from dataclasses import replace

    import numpy as np
    from rich.console import Console

    from planner.pipeline import design_plan
    from planner.planfile import load_plan
    from planner.predict.montecarlo import simulate
    from planner.report.simulation import render_simulation

    plan = design_plan(load_plan(ROOT / "recipes" / "iron-thiocyanate-tubes.toml"))
    gum = plan.uncertainty
    assert gum is not None
    simulation = simulate(plan.inputs, plan.mixtures, trials=200, rng=np.random.default_rng(1))

    def line(sim) -> str:
        console = Console(width=400)
        with console.capture() as captured:
            console.print(render_simulation(sim, gum))
        return next(t for t in captured.get().splitlines() if t.startswith("Bias of"))

    noise_free = gum.K.value / simulation.K_true - 1.0
    same = replace(simulation, K_bias_from_assumption=noise_free)
    assert "as the answer key gives it (noise-free)" in line(same)
    apart = replace(simulation, K_bias_from_assumption=noise_free + 0.05)
    text = line(apart)
    assert f"{100 * (noise_free + 0.05):+.3g} % for the virtual class's mean" in text
    assert f"{100 * noise_free:+.3g} % noise-free as the answer key gives it" in text
