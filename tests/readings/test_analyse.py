"""planner analyse on synthetic classes made by the tests' own equilibrium model
(tests/readings/classes.py: scipy brentq on the mass balances, not the planner's solver).

Outside references: the planted faults (known by construction), the true K used to make the
readings, and scipy.optimize.least_squares fitting the same readings with that independent
model.
"""

from __future__ import annotations

import json
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import least_squares
from typer.testing import CliRunner

from planner.cli import app
from planner.readings.analyse import analyse_class
from planner.readings.files import load_plans, section_shapes
from planner.readings.table import parse_readings
from tests.readings.classes import Fault, Section, class_rows, complex_M, reading, rows_csv

RUNNER = CliRunner()
# The default's shelf without its constant medium: the tests' own model (classes.py) has no
# activity coefficients, so the class is made in the medium the constants refer to.
TUBES = Path(__file__).resolve().parents[2] / "recipes" / "iron-thiocyanate-tubes.toml"
FAULTS = [
    Fault("slip", 1, 3, {"mixture": "S3", "factor": 0.85}),  # thiocyanate delivery 15 % short
    Fault("cuvette", 2, 5, {"path_cm": 1.1}),  # a 1.1 cm cuvette instead of 1 cm
    Fault("swap", 3, 7, {"mixtures": ("T1", "T4")}),  # two test tubes' labels swapped
]
PLANTED = {(1, 3), (2, 5), (3, 7)}


@pytest.fixture(scope="module")
def plan_folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("analyse") / "plan"
    result = RUNNER.invoke(
        app, ["plan", str(TUBES), "--out", str(out), "--date", "2026-01-01", "-q", "--no-plots"]
    )
    assert result.exit_code == 0, result.output
    return out


@pytest.fixture(scope="module")
def sections(plan_folder):
    plans = load_plans(plan_folder)
    return plans, {n: Section.of(plan_folder / "plan.json") for n in plans}


def _analyse(plans, rows):
    return analyse_class(plans, parse_readings(rows_csv(rows), section_shapes(plans)))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_planted_faults_are_flagged_and_the_pooled_fit_recovers_K(sections, seed):
    plans, synthetic = sections
    assert len(plans) * synthetic[1].benches == 30  # three sections of ten: a class of 30
    rows = class_rows(synthetic, np.random.default_rng(seed), noise=0.003, faults=FAULTS)
    result = _analyse(plans, rows)
    flagged = {(b.section, b.bench) for b in result.benches if b.flags}
    assert flagged >= PLANTED
    assert len(flagged - PLANTED) <= 1
    rules = {(b.section, b.bench): {f.rule for f in b.flags} for b in result.benches}
    assert "standard-off-line" in rules[(1, 3)]
    assert "readings-scaled" in rules[(2, 5)]
    # The two tests read as each other are named as a swap, and nothing else is left once
    # they are exchanged back (their K out of range followed from the swap alone).
    assert rules[(3, 7)] == {"mixtures-swapped"}
    (bench,) = [b for b in result.benches if (b.section, b.bench) == (3, 7)]
    assert bench.flags[0].mixtures == ("T1", "T4")
    true_K = synthetic[1].K  # the K the readings were made with
    assert result.pooled is not None
    assert pytest.approx(true_K, rel=0.02) == result.pooled.K
    # within its own uncertainty (3 u: the fit's u from 270 readings)
    assert abs(result.pooled.K - true_K) < 3 * result.pooled.u_K


def test_pooled_fit_follows_a_true_K_other_than_the_plans(sections):
    plans, synthetic = sections
    true_K = 0.9 * synthetic[1].K
    rows = class_rows(synthetic, np.random.default_rng(5), noise=0.003, K=true_K)
    result = _analyse(plans, rows)
    pooled = result.pooled
    assert pooled is not None
    # Every test's K is far from its predicted range, so the class disagrees as a whole.
    assert pooled.includes_flagged == all(b.flags for b in result.benches)
    assert abs(pooled.K - true_K) < 3 * pooled.u_K
    assert pytest.approx(true_K, rel=0.02) == pooled.K


def test_pooled_fit_agrees_with_scipy_least_squares_on_an_independent_model(sections):
    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(3), noise=0.003)
    result = _analyse(plans, rows)
    section = synthetic[1]
    ok = {(b.section, b.bench) for b in result.benches if not b.flags}
    by_bench = {}
    for s, bench, _, mixture, value in rows:
        if (s, bench) in ok:
            by_bench.setdefault((s, bench), {})[mixture] = value
    blank = section.ids[section.roles.index("blank")]
    fitted = [i for i, role in enumerate(section.roles) if role != "blank"]

    def model(theta):
        eps, k = theta[0] * section.epsilon, 10.0 ** theta[1]
        beta2 = section.beta2 * k / section.K
        a = [
            reading(
                complex_M(section.metal_M[i], section.ligand_M[i], k, beta2),
                eps,
                section.path_cm,
                section.stray,
            )
            for i in range(len(section.ids))
        ]
        return np.array([a[i] - a[section.ids.index(blank)] for i in fitted])

    net = np.concatenate(
        [[v[section.ids[i]] - v[blank] for i in fitted] for v in by_bench.values()]
    )

    def residuals(theta):
        return np.tile(model(theta), len(by_bench)) - net

    solution = least_squares(
        residuals, [1.0, math.log10(section.K)], method="lm", xtol=1e-14, ftol=1e-14
    )
    k_ref = 10.0 ** solution.x[1]
    eps_ref = solution.x[0] * section.epsilon
    pooled = result.pooled
    # Same data, same model written twice: agreement to the solvers' tolerances.
    assert pytest.approx(k_ref, rel=1e-6) == pooled.K
    assert pooled.epsilon == pytest.approx(eps_ref, rel=1e-6)
    # Both covariances come from MINPACK's forward-difference Jacobians at the solution,
    # good to a few tenths of a percent: 1 % tolerance.
    j = solution.jac
    s2 = (solution.fun @ solution.fun) / (solution.fun.size - 2)
    cov = np.linalg.inv(j.T @ j) * s2
    assert pooled.u_K == pytest.approx(k_ref * math.log(10) * math.sqrt(cov[1, 1]), rel=1e-2)
    assert pooled.u_epsilon == pytest.approx(section.epsilon * math.sqrt(cov[0, 0]), rel=1e-2)


def test_cli_on_the_class_flags_the_three_and_writes_the_folder(plan_folder, sections, tmp_path):
    _, synthetic = sections
    readings = tmp_path / "readings.csv"
    readings.write_text(
        rows_csv(class_rows(synthetic, np.random.default_rng(0), faults=FAULTS)),
        encoding="utf-8",
    )
    out = tmp_path / "marked"
    result = RUNNER.invoke(
        app,
        [
            "analyse",
            str(readings),
            "--plan",
            str(plan_folder),
            "--format",
            "json",
            "--out",
            str(out),
        ],
    )
    assert result.exit_code == 1, result.output
    document = json.loads(result.stdout)
    assert document["schema"] == "planner.analysis/1"
    flagged = {(b["section"], b["bench"]) for b in document["benches"] if b["status"] == "flagged"}
    assert flagged >= PLANTED
    bench = document["benches"][0]
    assert set(bench["K"]) == {"all_bound", "global_fit"}
    assert set(bench["epsilon"]) == {"all_bound", "global_fit"}
    assert document["class"]["K"]["global_fit"]["value"] == pytest.approx(98.0, rel=0.02)
    assert document["class"]["K"]["global_fit"]["u"] > 0
    assert json.loads((out / "analysis.json").read_text()) == document
    assert (out / "analysis.html").read_text().count("<tr>") > 30
    assert (out / "benches" / "section-03-bench-07-replicate-1.csv").is_file()
    root = ET.fromstring((out / "plots" / "bench-K.svg").read_bytes())  # W3C SVG 1.1
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert (out / "plots" / "residuals.svg").is_file()


def test_cli_all_ok_exits_0(plan_folder, sections, tmp_path):
    _, synthetic = sections
    readings = tmp_path / "readings.csv"
    # Noise-free readings from the plan's own K: no bench can be off.
    readings.write_text(rows_csv(class_rows(synthetic, np.random.default_rng(0), noise=0.0)))
    result = RUNNER.invoke(app, ["analyse", str(readings), "--plan", str(plan_folder)])
    assert result.exit_code == 0, result.output
    assert "30 bench sets, 30 ok, 0 flagged" in result.stdout


def test_variants_folder_analyses_each_section_against_its_own_plan(tmp_path):
    out = tmp_path / "variants"
    made = RUNNER.invoke(
        app,
        [
            "variants",
            "--sections",
            "6",
            "--seed",
            "1",
            "--out",
            str(out),
            "-q",
            "--date",
            "2026-01-01",
            _plan_file(tmp_path),
        ],
    )
    assert made.exit_code == 0, made.output
    assert (out / "readings-template.csv").is_file()
    plans = load_plans(out)
    assert sorted(plans) == [1, 2, 3, 4, 5, 6]
    synthetic = {n: Section.of(out / f"section-{n:02d}" / "plan.json") for n in plans}
    # Each section's own recipes: the test sets differ between sections.
    assert len({tuple(s.ligand_M) + tuple(s.metal_M) for s in synthetic.values()}) == 6
    rows = class_rows(synthetic, np.random.default_rng(2), noise=0.0)
    result = _analyse(plans, rows)
    assert {b.section for b in result.benches} == set(range(1, 7))
    assert all(not b.flags for b in result.benches)
    # Section 2's readings against section 1's plan would not fit: swap them and see flags.
    swapped = [(1 if s == 2 else 2 if s == 1 else s, b, r, m, v) for s, b, r, m, v in rows]
    assert any(b.flags for b in _analyse(plans, swapped).benches if b.section in (1, 2))


def _plan_file(tmp_path):
    text = TUBES.read_text(encoding="utf-8")
    text = text.replace("sections = 3", "sections = 1").replace(
        "benches_per_section = 10", "benches_per_section = 4"
    )
    path = tmp_path / "one.toml"
    path.write_text(text, encoding="utf-8")
    return str(path)


@pytest.mark.parametrize("wrong", ["S2", "S4"])
def test_one_wrong_standard_of_a_global_fit_plan_is_named_alone(default_out, wrong):
    # The default plan is designed for the global fit. One bench reads every mixture as the
    # plan predicts, with noise of a fifth of each u(A), but one standard 0.06 high (a
    # misread: about 10 of its u(A)). Fitted with the others, the wrong standard pulls the
    # fit and leaves the right ones off it too (by hand: a least-squares fit through one
    # outlier spreads it over every residual); fitted without it, only it is off.
    plans = load_plans(default_out)
    assert plans[1].analysis == "global-fit"
    rng = np.random.default_rng(5)
    rows = [
        (
            1,
            1,
            1,
            m.id,
            m.absorbance + rng.normal(0.0, 0.2 * m.u_absorbance) + (0.06 if m.id == wrong else 0),
        )
        for m in plans[1].mixtures
    ]
    (bench,) = [b for b in _analyse(plans, rows).benches if (b.section, b.bench) == (1, 1)]
    (flag,) = [f for f in bench.flags if f.rule == "standard-off-line"]
    assert flag.mixtures == (wrong,)
    assert f"the bench's global fit without {wrong}" in flag.evidence
    # Its residual against the fit of the others is the misread, within the noise.
    residual = float(flag.evidence.split(" is ")[1].split(" off ")[0])
    assert residual == pytest.approx(0.06, abs=0.01)
    # Read as planned, the same bench raises no standard-off-line flag at all.
    clean = [(s, b, r, i, v - (0.06 if i == wrong else 0)) for s, b, r, i, v in rows]
    (bench,) = [b for b in _analyse(plans, clean).benches if (b.section, b.bench) == (1, 1)]
    assert "standard-off-line" not in {f.rule for f in bench.flags}


def test_a_set_whose_rows_are_all_rejected_or_never_given_is_named(plan_folder, sections, tmp_path):
    # Bench 2/2 is given twice with different readings (every row rejected), bench 3/10 has
    # no row at all: neither may vanish from the report, and the lost one sets exit 1.
    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    twice = [(s, b, r, m, v + 0.01) for s, b, r, m, v in rows if (s, b) == (2, 2)]
    rows = [row for row in rows if row[:2] != (3, 10)] + twice
    result = _analyse(plans, rows)
    assert result.lost == ((2, 2, 1),)
    assert result.absent == ((3, 10, 1),)
    assert result.n_absent == 1
    assert result.sections_without_rows == ()
    assert result.flagged
    assert not any(b.flags for b in result.benches)
    assert {(b.section, b.bench) for b in result.benches}.isdisjoint({(2, 2), (3, 10)})

    readings = tmp_path / "readings.csv"
    readings.write_text(rows_csv(rows))
    done = RUNNER.invoke(app, ["analyse", str(readings), "--plan", str(plan_folder)])
    assert done.exit_code == 1, done.output
    text = " ".join(done.stdout.split())
    assert "28 bench sets, 28 ok, 0 flagged; 1 more with every row rejected." in text
    assert "Not analysed, every row rejected (section/bench/replicate): 2/2/1." in text
    assert "No rows in the file for 1 set(s) of mixtures the plan has" in text
    assert "3/10/1." in text
    as_json = RUNNER.invoke(
        app, ["analyse", str(readings), "--plan", str(plan_folder), "--format", "json"]
    )
    document = json.loads(as_json.stdout)
    assert document["lost"] == [{"section": 2, "bench": 2, "replicate": 1}]
    assert document["absent"] == {
        "count": 1,
        "listed": [{"section": 3, "bench": 10, "replicate": 1}],
        "sections": [],
    }


def test_sections_without_rows_are_named_not_listed_bench_by_bench(sections):
    # Only section 1 handed in: the other sections are named once, not as 20 sets.
    plans, synthetic = sections
    rows = [row for row in class_rows(synthetic, np.random.default_rng(1)) if row[0] == 1]
    result = _analyse(plans, rows)
    assert result.sections_without_rows == (2, 3)
    assert result.n_absent == 0
    assert result.absent == ()
    assert result.lost == ()


def test_one_wild_test_reading_is_not_called_a_scale_and_gives_no_K(sections):
    # One test tube read at 2.2 pulls the least-squares factor of the bench's readings, but
    # the others sit on their predictions: no readings-scaled flag; the test itself is named,
    # as giving no K (more product than its reagents hold), and left out of the bench's mean.
    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    rows = [(s, b, r, m, 2.2 if (s, b, m) == (1, 4, "T3") else v) for s, b, r, m, v in rows]
    (bench,) = [b for b in _analyse(plans, rows).benches if (b.section, b.bench) == (1, 4)]
    rules = {f.rule: f for f in bench.flags}
    assert "readings-scaled" not in rules
    assert "reading-outside-window" in rules
    assert "T3 gives no K" in rules["test-K-outside-range"].evidence
    others = [m.K.value for m in bench.mixtures if m.role == "test" and m.id != "T3"]
    assert bench.K_all_bound.value == pytest.approx(np.mean(others), rel=1e-12)


def test_a_bench_read_through_a_longer_cuvette_is_still_called_scaled(sections):
    # The counterpart: every reading 1.1 x (a 1.1 cm cuvette) moves the median ratio too.
    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    rows = [(s, b, r, m, v * 1.1 if (s, b) == (1, 4) else v) for s, b, r, m, v in rows]
    (bench,) = [b for b in _analyse(plans, rows).benches if (b.section, b.bench) == (1, 4)]
    assert "readings-scaled" in [f.rule for f in bench.flags]


@pytest.mark.parametrize("wrong", ["S2", "S4"])
def test_one_wrong_standard_of_an_all_bound_plan_is_named_alone(sections, wrong):
    # The tubes plan is designed for the all-bound analysis: each standard is checked against
    # the line through the others. A standard misread 0.1 low tilts the line every other
    # standard is checked against, so two or three used to be flagged; with the wrong one
    # left out of the lines (the same unmasking as the global fit's), it is named alone, and
    # its residual is the misread (by hand: the line through the right standards goes
    # through their noise-free readings).
    plans, synthetic = sections
    assert plans[1].analysis == "all-bound"
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    rows = [(s, b, r, m, v - 0.1 if (s, b, m) == (1, 2, wrong) else v) for s, b, r, m, v in rows]
    (bench,) = [b for b in _analyse(plans, rows).benches if (b.section, b.bench) == (1, 2)]
    (flag,) = [f for f in bench.flags if f.rule == "standard-off-line"]
    assert flag.mixtures == (wrong,)
    assert f"{wrong} is " in flag.evidence
    assert "off the line through the other standards (" in flag.evidence
    residual = float(flag.evidence.split(" is ")[1].split(" off ")[0])
    assert residual == pytest.approx(-0.1, abs=0.005)


@pytest.mark.parametrize("offset", [0.04, -0.03])
def test_a_blank_read_off_against_the_other_cuvettes_is_one_flag(sections, offset):
    # Every standard and test of bench 2/6 reads `offset` above (or below) its prediction,
    # the blank as planned: one blank-offset flag names it, and the standards and tests it
    # moved raise nothing of their own once it is taken off (noise-free class, so the
    # offset found is the planted one).
    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    rows = [
        (s, b, r, m, v + offset if (s, b) == (2, 6) and not m.startswith("B") else v)
        for s, b, r, m, v in rows
    ]
    result = _analyse(plans, rows)
    (bench,) = [b for b in result.benches if (b.section, b.bench) == (2, 6)]
    assert [f.rule for f in bench.flags] == ["blank-offset"]
    word = "above" if offset > 0 else "below"
    assert f"reads {abs(offset):.4g} {word} its prediction" in bench.flags[0].evidence.replace(
        f"reads {offset:.4g}", f"reads {abs(offset):.4g}"
    )
    assert sum(1 for b in result.benches if b.flags) == 1


def test_a_wrong_standard_does_not_flag_the_tests_it_tilted(sections):
    # S3 misread 0.08 high tilts the standard curve, so every test's all-bound K moves with
    # it; the bench is flagged for S3 alone, the tests being judged on the curve without it.
    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    rows = [(s, b, r, m, v + 0.08 if (s, b, m) == (3, 2, "S3") else v) for s, b, r, m, v in rows]
    (bench,) = [b for b in _analyse(plans, rows).benches if (b.section, b.bench) == (3, 2)]
    assert [f.rule for f in bench.flags] == ["standard-off-line"]
    assert bench.flags[0].mixtures == ("S3",)


def test_readings_of_another_plan_are_said_to_be_so(sections):
    # Mixture ids this plan does not have on every bench but one: most rows are rejected,
    # and the report says to check the plan folder before anything else.
    from planner.report.analyse_text import not_analysed

    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    rows = [(s, b, r, m if (s, b) == (1, 1) else f"X{m}", v) for s, b, r, m, v in rows]
    result = _analyse(plans, rows)
    lines = not_analysed(result)
    assert lines[0].startswith(f"Most rows were rejected ({len(rows) - 11} of {len(rows)})")
    clean = _analyse(plans, class_rows(synthetic, np.random.default_rng(0), noise=0.0))
    assert not any(line.startswith("Most rows") for line in not_analysed(clean))


def test_a_far_flagged_bench_sits_at_the_edge_of_the_bench_K_figure(sections):
    # Two standards read as each other give bench 1/2 a K far from the others': the
    # axis keeps to the predicted ranges, the plan's K and the ok benches, and the far value
    # is drawn at the axis's edge with its value written beside it.
    from planner.report.plots.readings import bench_K_figure

    plans, synthetic = sections
    rows = class_rows(synthetic, np.random.default_rng(0), noise=0.0)
    values = {(s, b, m): v for s, b, r, m, v in rows}
    swapped = {"S1": values[(1, 2, "S5")], "S5": values[(1, 2, "S1")]}
    rows = [(s, b, r, m, swapped.get(m, v) if (s, b) == (1, 2) else v) for s, b, r, m, v in rows]
    result = _analyse(plans, rows)
    (bench,) = [b for b in result.benches if (b.section, b.bench) == (1, 2)]
    chart = bench_K_figure(result)
    far = [
        v
        for v in (bench.K_all_bound.value, bench.K_global_fit.value)
        if not chart.x.low <= v <= chart.x.high
    ]
    assert far  # the swap moved at least one of its K off the axis
    assert chart.x.high < 10 * result.K_true  # the others are not squeezed into a corner
    for gid in ("K_all_bound-flagged", "K_global_fit-flagged"):
        for mark in chart.find(gid):
            assert all(chart.x.low <= x <= chart.x.high for x in mark.x.tolist())
    notes = " ".join(note.text for note in chart.notes)
    from planner.report._format import significant

    for value in far:
        assert significant(value, 4) in notes
