"""Benchmark: `planner plan FILE` on the largest shelf the plan-file limits accept.

The plan file is the embedded default with as many ``[[stocks]]`` tables as the plan-file
reader accepts (``planner.planfile.MAX_STOCKS``) and as many ``[[glassware]]`` tables
(``MAX_GLASSWARE``), every device a catalogue size of its kind (class A), each graduated
device and piston pipette read as finely as the reader accepts (the finest division or step
of the 1-2-5 series within ``MAX_READINGS`` readings). The limits are read from the code, so
the benchmark follows them when they change. Prints the median CPU time (user +
system) of the whole process over several runs, and its wall time (target <= 5 s CPU).
Run: python tests/benchmarks/big_shelf.py [--runs N] [--json] [--write FILE]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import tempfile
import tomllib
from importlib.resources import files
from pathlib import Path
from typing import Any

from _timing import children_peak_MB, seconds

from planner.planfile import parse_plan
from planner.planfile.schema import MAX_GLASSWARE, MAX_READINGS, MAX_STOCKS

_GRADUATED = frozenset({"graduated-pipette", "buret", "graduated-cylinder"})


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, dict):
        pairs = ", ".join(f"{json.dumps(k)} = {_toml_value(v)}" for k, v in value.items())
        return "{ " + pairs + " }"
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return repr(value)


def _table(header: str, entries: dict[str, Any]) -> str:
    lines = [f"[{header}]"] + [f"{key} = {_toml_value(v)}" for key, v in entries.items()]
    return "\n".join(lines) + "\n"


def _stocks(default: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """The default's stocks and further dilutions of its reagent stocks, up to MAX_STOCKS."""
    stocks = list(default)
    reagents = [s for s in default if not s.get("diluent")]
    factor = 1
    while len(stocks) < MAX_STOCKS:
        factor += 1
        for stock in reagents:
            if len(stocks) == MAX_STOCKS:
                break
            # Each reagent at 1/factor of its strength, medium (H+, NO3-) kept as it is.
            reagent = {k: v for k, v in stock["contains_M"].items() if k not in ("H+", "NO3-")}
            contains = {k: v / factor for k, v in reagent.items()}
            contains |= {k: stock["contains_M"][k] for k in ("H+", "NO3-")}
            diluted = dict(stock, id=f"{stock['id']}-{factor}", contains_M=contains)
            stocks.append(diluted)
    return stocks


def _catalogue() -> list[dict[str, Any]]:
    """Every catalogue device of the tolerance tables (one per kind and size, ids are kind
    plus size), smallest first: ISO glassware, ISO 8655-2 piston pipettes, and tubes."""
    from planner.lab.tolerances import ISO_8655_2_ERRORS_uL, ISO_TOLERANCES_mL

    entries: list[dict[str, Any]] = [
        {"kind": kind, "volume_mL": size, "class": "A"}
        for kind, classes in ISO_TOLERANCES_mL.items()
        for size in classes["A"]
    ]
    for nominal_uL in ISO_8655_2_ERRORS_uL:
        # Adjustable over the usual tenth of the nominal volume upwards, in steps of 1 %.
        low = nominal_uL / 10.0
        entries.append(
            {"kind": "piston-pipette", "range_uL": [low, nominal_uL], "step_uL": low / 10.0}
        )
    # One of each delivering device per stock, so no stock waits for another's device.
    for entry in entries:
        entry["count"] = MAX_STOCKS
    entries += [{"kind": "tube", "volume_mL": size} for size in (5.0, 10.0, 15.0, 50.0)]
    return sorted(entries, key=lambda e: e.get("volume_mL", e.get("range_uL", [0, 0])[1] / 1e3))


def _finest(entry: dict[str, Any]) -> dict[str, Any]:
    """The entry read as finely as the plan-file reader accepts: the smallest division (or
    piston step) of the 1-2-5 series that keeps the device within MAX_READINGS readings."""
    from planner.inputs import Device
    from planner.lab.deliveries import reading_count

    piston = entry["kind"] == "piston-pipette"
    if not piston and entry["kind"] not in _GRADUATED:
        return entry
    for exponent in range(-6, 3):
        for mantissa in (1, 2, 5):
            value = float(f"{mantissa}e{exponent}")
            if piston:
                low, high = entry["range_uL"]
                if value < 0.001 or value > low:
                    continue
                device = Device(
                    kind="piston-pipette",
                    volume_mL=high / 1000.0,
                    range_uL=(low, high),
                    step_uL=value,
                )
                finer = dict(entry, step_uL=value)
            else:
                device = Device(
                    kind=entry["kind"],
                    volume_mL=entry["volume_mL"],
                    device_class="A",
                    division_mL=value,
                )
                finer = dict(entry, division_mL=value)
            if reading_count(device) <= MAX_READINGS:
                return finer
    return entry


def _glassware() -> list[dict[str, Any]]:
    """The first MAX_GLASSWARE catalogue devices, smallest first, each graduated device and
    piston pipette read as finely as the reader accepts."""
    return [_finest(entry) for entry in _catalogue()[:MAX_GLASSWARE]]


def plan_text(*, all_stocks: bool = True) -> str:
    """The plan file at the limits, as TOML text; raises if the reader refuses it.

    ``all_stocks`` False keeps the default's stocks (the shelf alone at its limit): with
    every stock the candidate grid is thinned harder, so neither plan is the slower one for
    certain, and the benchmark times both."""
    default = tomllib.loads((files("planner") / "data" / "default.toml").read_text("utf-8"))
    parts = [f"title = {json.dumps('Largest shelf the plan-file limits accept (benchmark)')}\n"]
    reaction = {k: v for k, v in default["reaction"].items() if k != "species"}
    parts.append(_table("reaction", reaction))
    parts += [_table("[reaction.species]", s) for s in default["reaction"]["species"]]
    parts.append(_table("instrument", default["instrument"]))
    stocks = _stocks(default["stocks"]) if all_stocks else default["stocks"]
    parts += [_table("[stocks]", s) for s in stocks]
    parts += [_table("[glassware]", g) for g in _glassware()]
    parts.append(_table("design", default["design"]))
    parts.append(_table("session", default["session"]))
    text = "\n".join(parts)
    inputs = parse_plan(text, source="big shelf")  # raises when a limit is passed
    assert len(inputs.stocks) == len(stocks)
    return text


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--json", action="store_true")
    parser.add_argument("--write", type=Path, help="also write the plan file here")
    args = parser.parse_args()
    texts = {"all": plan_text(), "default": plan_text(all_stocks=False)}
    if args.write:
        args.write.write_text(texts["all"], encoding="utf-8")
    glassware = texts["all"].count("[[glassware]]")
    cpu: dict[str, list[float]] = {name: [] for name in texts}
    wall: dict[str, list[float]] = {name: [] for name in texts}
    with tempfile.TemporaryDirectory() as folder:
        for name, text in texts.items():
            path = Path(folder) / f"big-shelf-{name}.toml"
            path.write_text(text, encoding="utf-8")
            command = [sys.executable, "-m", "planner", "plan", str(path), "--format", "json"]
            for _ in range(args.runs):
                elapsed, used = seconds(command)
                wall[name].append(elapsed)
                cpu[name].append(used)
    figures = {
        "stocks": MAX_STOCKS,
        "glassware": glassware,
        "cpu_median_s": statistics.median(cpu["all"]),
        "wall_median_s": statistics.median(wall["all"]),
        "default_stocks_cpu_median_s": statistics.median(cpu["default"]),
        "default_stocks_wall_median_s": statistics.median(wall["default"]),
        "runs": args.runs,
        "peak_memory_MB": children_peak_MB(),
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(
        f"planner plan on {MAX_STOCKS} stocks and {glassware} glassware tables: median "
        f"{figures['cpu_median_s']:.2f} s CPU, {figures['wall_median_s']:.2f} s wall "
        "(target <= 5 s CPU)"
    )
    print(
        f"the same shelf with the default's stocks: median "
        f"{figures['default_stocks_cpu_median_s']:.2f} s CPU, "
        f"{figures['default_stocks_wall_median_s']:.2f} s wall (target <= 5 s CPU)"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
