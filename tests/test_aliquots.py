"""Scenario: a micro-scale plan whose only device is a 100-1000 µL piston pipette (issue 11).

The plan is invented for this test: a 1:1 complex of an invented metal ion M2+ and ligand L-
(K = 2000 L/mol, eps = 3000 L mol-1 cm-1, stock concentrations our own, every stock in one
0.25 mol/L nitrate medium), mixed in 5 mL tubes.
Volumes above 1 mL need repeated deliveries of the one pipette.
"""

from __future__ import annotations

import json

from typer.testing import CliRunner

from planner.cli import app

MICRO_PLAN = """
title = "Micro-scale 1:1 complex (invented)"

[reaction]
temperature_C = 25
ionic_strength_M = 0.25
components = ["M2+", "L-"]

[[reaction.species]]
name = "ML+"
formula = { "M2+" = 1, "L-" = 1 }
K = 2000
epsilon = 3000

[instrument]
wavelength_nm = 500
path_length_cm = 1.0
absorbance_window = [0.10, 0.90]
absorbance_sd = 0.003
stray_light = 0.001
cuvette_fill_mL = 1.0

[[stocks]]
id = "metal"
contains_M = { "M2+" = 0.050, "H+" = 0.1, "NO3-" = 0.20 }
relative_uncertainty = 0.002
available_mL = 500

[[stocks]]
id = "ligand"
contains_M = { "L-" = 1.0e-3, "Na+" = 0.151, "H+" = 0.1, "NO3-" = 0.25 }
relative_uncertainty = 0.003
available_mL = 500

[[stocks]]
id = "medium"
contains_M = { "H+" = 0.1, "Na+" = 0.15, "NO3-" = 0.25 }
diluent = true
available_mL = 2000

[[glassware]]
kind = "piston-pipette"
range_uL = [100, 1000]
step_uL = 1
count = 3

[design]
standards = 5
tests = 5
limiting = "L-"
assumption_tolerance = 0.05
vessel = "tube"
total_volume_mL = 5

[session]
sections = 2
benches_per_section = 8
replicates = 1
"""

PIPETTE = "piston-pipette-100-1000uL"


def _planned(tmp_path):
    plan_file = tmp_path / "micro.toml"
    plan_file.write_text(MICRO_PLAN, encoding="utf-8")
    out = tmp_path / "out"
    result = CliRunner().invoke(app, ["plan", str(plan_file), "--out", str(out), "--no-plots"])
    return result, out / "plan.json"


def test_micro_scale_plan_passes_every_check_with_repeated_deliveries(tmp_path):
    result, saved = _planned(tmp_path)
    assert result.exit_code == 0, result.output
    document = json.loads(saved.read_text("utf-8"))
    # Every check passes (the stocks share one ionic medium, 0.25 mol/L, as a careful lab
    # makes them, so the ionic strength stays put however much metal a standard takes).
    assert {c["status"] for c in document["checks"]} == {"pass"}
    repeated = 0
    for mixture in document["mixtures"]:
        for addition in mixture["additions"]:
            deliveries = addition["deliveries"]
            assert [d["device"] for d in deliveries] == addition["devices"]
            assert abs(sum(d["volume_mL"] for d in deliveries) - addition["volume_mL"]) < 1e-9
            # Inside the pipette's range, full scale first, the remainder last.
            assert all(0.1 - 1e-12 <= d["volume_mL"] <= 1.0 + 1e-12 for d in deliveries)
            assert all(d["volume_mL"] == 1.0 for d in deliveries[:-1])
            assert 1 <= len(deliveries) <= 5
            repeated += len(deliveries) > 1
    assert repeated > 0


def test_verify_passes_and_catches_a_tampered_delivery(tmp_path):
    result, saved = _planned(tmp_path)
    assert result.exit_code == 0, result.output
    runner = CliRunner()
    assert runner.invoke(app, ["verify", str(saved)]).exit_code == 0

    document = json.loads(saved.read_text("utf-8"))
    addition = next(
        a for m in document["mixtures"] for a in m["additions"] if len(a["deliveries"]) > 1
    )
    # 1.000 mL -> 1.050 mL: above the pipette's 1000 µL range (and off the stated sum).
    addition["deliveries"][0]["volume_mL"] = 1.05
    saved.write_text(json.dumps(document), encoding="utf-8")
    tampered = runner.invoke(app, ["verify", str(saved), "--format", "json"])
    assert tampered.exit_code == 1
    checks = {c["name"]: c["status"] for c in json.loads(tampered.stdout)["checks"]}
    assert checks["deliverable-volumes"] == "fail"


def test_bench_sheet_reads_the_deliveries_as_a_person_would(tmp_path):
    result, saved = _planned(tmp_path)
    assert result.exit_code == 0, result.output
    sheets = "".join(p.read_text("utf-8") for p in (saved.parent / "benches").glob("*.md"))
    assert " x 1000 uL, then " in sheets
