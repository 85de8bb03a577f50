"""Tests of the figures' chart kit (planner.report.plots._svg): ticks, geometry, text, legend.

The SVG is read back with the standard library's XML parser (W3C SVG 1.1: the root ``svg``
element in the SVG namespace, user units set by ``viewBox``); positions are checked against
the axes' frame drawn in the same file, so a tick label must sit where its value is plotted.
Tick values are checked against lists worked out by hand beside each case.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from planner.report.plots._style import power_label
from planner.report.plots._svg import (
    Chart,
    Line,
    Note,
    Points,
    Scale,
    Stroke,
    linear_labels,
    linear_ticks,
    log_ticks,
    steps,
    text_width,
)

SVG = "{http://www.w3.org/2000/svg}"


def _frame(root: ET.Element) -> tuple[float, float, float, float]:
    """left, top, right, bottom of the axes' frame (the rect with no fill and a stroke)."""
    for rect in root.iter(SVG + "rect"):
        if rect.get("fill") == "none" and rect.get("stroke"):
            left, top = float(rect.get("x")), float(rect.get("y"))
            return left, top, left + float(rect.get("width")), top + float(rect.get("height"))
    raise AssertionError("no frame")


_PLACES = ("x", "y", "cx", "cy", "r", "width", "height", "x1", "x2", "y1", "y2")


def assert_coordinates_finite(root: ET.Element) -> None:
    """Every position and size in the file is a finite number, every path only numbers and
    the path commands (SVG 1.1, 8.3)."""
    for element in root.iter():
        for name in _PLACES:
            value = element.get(name)
            if value is not None and not value.endswith("pt"):
                assert math.isfinite(float(value)), (element.tag, name, value)
        d = element.get("d")
        if d is not None:
            assert re.fullmatch(r"[MLHVlhvz0-9.\- ]+", d), d


def _chart(**scales) -> Chart:
    chart = Chart("test", 3.0, title="A test")
    chart.x = scales.get("x", Scale(0.0, 10.0, label="x [mL]"))
    chart.y = scales.get("y", Scale(0.0, 1.0, label="y [unitless]"))
    return chart


# ---------------------------------------------------------------------------------------------
# Ticks, against values worked out by hand
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("low", "high", "expected"),
    [
        # span 1 over 6 bins: 0.167 -> step 0.2 (the next of 1, 2, 2.5, 5 x 0.1)
        (0.0, 1.0, [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]),
        # span 1.15: 0.19 -> 0.2; ticks inside [-0.03, 1.12]
        (-0.03, 1.12, [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]),
        # span 2.2e-4: 3.7e-5 -> 5e-5
        (0.0, 2.2e-4, [0.0, 5e-5, 1e-4, 1.5e-4, 2e-4]),
        # span 100: 16.7 -> 20
        (20.0, 120.0, [20.0, 40.0, 60.0, 80.0, 100.0, 120.0]),
        # span 12: 2 -> 2 exactly (a step equal to the raw width is kept)
        (0.0, 12.0, [0.0, 2.0, 4.0, 6.0, 8.0, 10.0, 12.0]),
        # span 1.4: 0.233 -> 0.25
        (0.0, 1.4, [0.0, 0.25, 0.5, 0.75, 1.0, 1.25]),
    ],
)
def test_linear_ticks_are_round_steps(low, high, expected):
    assert linear_ticks(low, high) == pytest.approx(expected, abs=1e-15)


def test_linear_labels_scale_small_and_large_numbers_by_a_power_of_ten():
    assert linear_labels([0.0, 5e-5, 1e-4, 1.5e-4, 2e-4]) == (
        ["0.0", "0.5", "1.0", "1.5", "2.0"],
        "×10⁻⁴",
    )
    assert linear_labels([0.0, 0.25, 0.5]) == (["0.00", "0.25", "0.50"], "")
    assert linear_labels([2e5, 4e5]) == (["2", "4"], "×10⁵")
    assert linear_labels([-0.2, 0.0, 0.2]) == (["−0.2", "0.0", "0.2"], "")
    assert linear_labels([40.0, 60.0]) == (["40", "60"], "")


def test_log_ticks_are_decades_with_minor_multiples():
    major, minor = log_ticks(9e-4, 5.0)
    assert major == pytest.approx([1e-3, 1e-2, 1e-1, 1.0])
    assert minor[:3] == pytest.approx([9e-4, 2e-3, 3e-3])  # 9 x 1e-4 is the low end
    assert max(minor) == pytest.approx(5.0)  # 5 x 1, the last inside
    # Less than two decades inside: 1, 2 and 5 times them are labelled.
    major, _ = log_ticks(2.0, 80.0)
    assert major == pytest.approx([2.0, 5.0, 10.0, 20.0, 50.0])
    # Twelve decades: every second one, so the labels do not touch.
    major, _ = log_ticks(1e-9, 1e3)
    assert len(major) == 7
    assert [power_label(v) for v in major[:2]] == ["10⁻⁹", "10⁻⁷"]


def test_steps_outline_a_histogram():
    x, y = steps([0.0, 1.0, 2.0], [3, 4])
    assert list(x) == [0.0, 0.0, 1.0, 1.0, 2.0, 2.0]
    assert list(y) == [0.0, 3.0, 3.0, 4.0, 4.0, 0.0]


# ---------------------------------------------------------------------------------------------
# Geometry: marks and tick labels where their values are
# ---------------------------------------------------------------------------------------------


def _tick_labels(root: ET.Element, frame, axis: str) -> dict[str, float]:
    """Tick label text -> its position along ``axis`` [pt], read from the labels' group."""
    left, _, _, bottom = frame
    found = {}
    for text in root.iter(SVG + "text"):
        content = "".join(text.itertext())
        x, y = float(text.get("x")), float(text.get("y"))
        if axis == "x" and text.get("text-anchor") == "middle" and bottom < y < bottom + 20:
            found[content] = x
        if axis == "y" and text.get("text-anchor") == "end" and x < left:
            found[content] = y
    return found


def test_points_and_tick_labels_sit_at_their_values_on_linear_axes():
    chart = _chart()
    chart.add(Points("p", np.array([0.0, 2.5, 10.0]), np.array([0.0, 0.5, 1.0]), label="p"))
    root = ET.fromstring(chart.svg())
    left, top, right, bottom = frame = _frame(root)
    circles = [(float(c.get("cx")), float(c.get("cy"))) for c in root.iter(SVG + "circle")]
    # The legend's sample circle is the last; the three data points come first.
    expected = [(left, bottom), (left + 0.25 * (right - left), (top + bottom) / 2), (right, top)]
    for (cx, cy), (ex, ey) in zip(circles[:3], expected, strict=True):
        assert cx == pytest.approx(ex, abs=0.01)
        assert cy == pytest.approx(ey, abs=0.01)
    x_labels = _tick_labels(root, frame, "x")
    for text, position in x_labels.items():
        assert left + float(text) / 10.0 * (right - left) == pytest.approx(position, abs=0.01)
    assert set(x_labels) == {"0", "2", "4", "6", "8", "10"}
    y_labels = _tick_labels(root, frame, "y")
    for text, position in y_labels.items():
        assert bottom - float(text) * (bottom - top) == pytest.approx(position, abs=0.01)


def test_tick_labels_sit_at_their_decades_on_a_log_axis():
    chart = _chart(x=Scale(1e-4, 1.0, log=True, label="c [mol/L]"))
    root = ET.fromstring(chart.svg())
    left, _, right, _ = frame = _frame(root)
    labels = _tick_labels(root, frame, "x")
    assert set(labels) == {"10⁻⁴", "10⁻³", "10⁻²", "10⁻¹", "1"}
    # Four decades across the axes: each a quarter of its width.
    assert labels["10⁻³"] == pytest.approx(left + 0.25 * (right - left), abs=0.01)
    assert labels["10⁻¹"] == pytest.approx(left + 0.75 * (right - left), abs=0.01)


def test_lines_far_outside_the_axes_stay_finite_and_clipped():
    chart = _chart()
    chart.add(Line("l", np.array([0.0, 5.0, 10.0]), np.array([0.0, 1e12, np.nan]), Stroke()))
    data = chart.svg()
    root = ET.fromstring(data)
    (group,) = [g for g in root.iter(SVG + "g") if g.get("data-gid") == "l"]
    assert group.get("clip-path") == "url(#test-axes)"
    d = next(group.iter(SVG + "path")).get("d")
    numbers = [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?", d)]
    assert len(numbers) == 4  # the NaN point is left out
    assert max(abs(v) for v in numbers) < 2000
    assert_coordinates_finite(root)


# ---------------------------------------------------------------------------------------------
# Text and legend
# ---------------------------------------------------------------------------------------------


def test_text_is_escaped_and_stays_text():
    chart = _chart(x=Scale(0.0, 1.0, label='<b>"M&L"</b> [mol/L]'))
    chart.add(Points("p", np.array([0.5]), np.array([0.5]), label="a < b & c"))
    chart.note(Note("<script>", 0.5, 0.5))
    root = ET.fromstring(chart.svg())
    texts = ["".join(t.itertext()) for t in root.iter(SVG + "text")]
    assert '<b>"M&L"</b> [mol/L]' in texts
    assert "a < b & c" in texts
    assert "<script>" in texts
    assert not list(root.iter(SVG + "script"))
    assert not list(root.iter(SVG + "b"))


def test_legend_entries_fit_across_the_figure():
    chart = _chart()
    for k in range(5):
        label = f"series {k} with a rather long description of what it shows, {k * 1000} L/mol"
        chart.add(Line(f"s{k}", np.array([0.0, 1.0]), np.array([0.0, 1.0]), Stroke(), label=label))
    root = ET.fromstring(chart.svg())
    width = float(root.get("width")[:-2])
    (legend,) = [g for g in root.iter(SVG + "g") if g.get("class") == "legend"]
    for text in legend.iter(SVG + "text"):
        right = float(text.get("x")) + text_width("".join(text.itertext()), 9.0)
        assert right <= width
    # Long entries take one column: five rows, each its own height below the axes.
    rows = {text.get("y") for text in legend.iter(SVG + "text")}
    assert len(rows) == 5
    assert float(root.get("height")[:-2]) > 3.0 * 72 + 5 * 15


def test_text_width_estimate_is_near_the_font_metrics():
    # DejaVu Sans advances (from memory): digits 0.636 em, "m" 0.974 em, space 0.318 em.
    assert text_width("0123456789", 10.0) == pytest.approx(63.6, rel=0.1)
    assert text_width("mmmm", 10.0) == pytest.approx(4 * 9.74, rel=0.15)
    assert math.isclose(text_width("", 10.0), 0.0)


def test_marks_at_values_a_scale_cannot_place_are_left_out():
    # NaN has no position: those parts are left out. Zero on a log axis lies infinitely far
    # left: it is drawn just off the page (the axes' clip hides the rest of a bar from it).
    # Every number written is finite (SVG 1.1, 8.3).
    from planner.report.plots._svg import Arrow, Band, Rects, Rule, Segments

    chart = _chart(x=Scale(1e-3, 1.0, log=True, label="c [mol/L]"))
    nan, inf = float("nan"), float("inf")
    chart.add(Rects("r", np.array([0.01, 0.0]), np.array([0.1, nan]), np.zeros(2), np.ones(2)))
    x0, x1 = np.array([nan, 0.01]), np.array([0.1, 0.1])
    chart.add(Segments("s", x0, np.zeros(2), x1, np.ones(2), Stroke()))
    chart.add(Rule("v", "x", -1.0, Stroke()))
    chart.add(Band("b", "y", nan, 0.5))
    chart.add(Arrow("a", 0.01, inf, 0.5, Stroke()))
    chart.add(Points("p", np.array([0.0, 0.1, nan]), np.array([0.5, 0.5, 0.5])))
    chart.note(Note("gone", nan, 0.5))
    root = ET.fromstring(chart.svg())
    assert_coordinates_finite(root)
    groups = {g.get("data-gid"): g for g in root.iter(SVG + "g") if g.get("data-gid")}
    assert len(list(groups["r"].iter(SVG + "rect"))) == 1  # the bar from 0.01 only
    assert groups["s"].find(SVG + "path").get("d").count("M") == 1
    assert "v" not in groups  # a rule at -1 on a log axis
    assert "b" not in groups
    assert "a" not in groups  # an arrow to infinity: drawn off the page, so left out
    circles = [float(c.get("cx")) for c in groups["p"].iter(SVG + "circle")]
    assert len(circles) == 2
    assert circles[0] < 0  # the point at 0, off the page
    assert "gone" not in ["".join(t.itertext()) for t in root.iter(SVG + "text")]
