"""A small chart kit that writes SVG: one axes, linear, log or labelled scales, a legend below.

The planner's figures are a handful of fixed kinds (a calibration ladder, a sweep, a coverage
strip, histograms, per-bench rows), so they are described here as data and written as SVG 1.1
text (W3C, Scalable Vector Graphics 1.1, second edition, 2011) without a plotting library:
a figure costs milliseconds rather than the second a general plotting library took to import
and lay out, the bytes depend on the data alone, and the text stays text (searchable, read by
screen readers, crisp in print and in the PDF that Chromium makes of the sheets).

A :class:`Chart` collects marks (:class:`Line`, :class:`Points`, :class:`Band`, :class:`Rule`,
:class:`Rects`, :class:`Segments`, :class:`Arrow`) and notes (:class:`Note`), each drawn series
named by a ``gid``, so tests and callers read the plotted numbers back with :meth:`Chart.find`.
:meth:`Chart.svg` lays the figure out once: the margins come from the text they hold (widths
estimated from per-character advances, below), the ticks from :func:`linear_ticks` and
:func:`log_ticks`. Sizes are in points (1/72 in); the root element's width and height are
given in ``pt`` so the figure prints at its natural size.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Literal
from xml.sax.saxutils import escape, quoteattr

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.report.plots._style import (
    BAND,
    FONT_FAMILY,
    HATCH,
    INK,
    WIDTH_IN,
    power_label,
    power_of_ten,
)

Axis = Literal["x", "y"]
Marker = Literal["o", "s", "D"]
Anchor = Literal["start", "middle", "end"]

_PT_PER_IN = 72.0
_TITLE_PT = 11.0
_LABEL_PT = 10.5
_TICK_PT = 9.5
_LEGEND_PT = 9.0
_TICK_LENGTH = 3.5
_PAD = 3.5
# Height of one legend row [pt] (0.22 in at 9 pt text).
_LEGEND_ROW = 15.84
# A legend entry's handle and the space before its text, and the gap between columns [pt].
_LEGEND_HANDLE = 26.0
_LEGEND_GAP = 14.0


@dataclass(frozen=True)
class Stroke:
    """A line's colour, width [pt] and dash pattern [pt] (empty: solid)."""

    color: str = INK
    width: float = 1.0
    dash: tuple[float, ...] = ()


@dataclass(frozen=True)
class Line:
    """A polyline through (x, y) in data units, clipped to the axes."""

    gid: str
    x: NDArray[np.float64]
    y: NDArray[np.float64]
    stroke: Stroke
    label: str | None = None
    z: float = 2.0


@dataclass(frozen=True)
class Points:
    """Markers at (x, y): ``o`` circle, ``s`` square, ``D`` diamond; ``size`` is the marker's
    width [pt]; ``face`` ``"none"`` draws it hollow."""

    gid: str
    x: NDArray[np.float64]
    y: NDArray[np.float64]
    marker: Marker = "o"
    size: float = 7.0
    face: str = INK
    edge: str = INK
    edge_width: float = 0.9
    label: str | None = None
    z: float = 3.0


@dataclass(frozen=True)
class Band:
    """The strip ``low`` to ``high`` along ``axis`` across the whole axes (``axis`` "y": a
    horizontal band between two readings)."""

    gid: str
    axis: Axis
    low: float
    high: float
    fill: str = "none"
    edge: Stroke | None = None
    hatch: bool = False
    label: str | None = None
    z: float = 0.0


@dataclass(frozen=True)
class Rule:
    """A straight line across the axes at ``value`` on ``axis`` (``axis`` "x": vertical)."""

    gid: str
    axis: Axis
    value: float
    stroke: Stroke
    label: str | None = None
    z: float = 2.0


@dataclass(frozen=True)
class Rects:
    """Rectangles from (x0, y0) to (x1, y1) in data units (histogram bars, range bars)."""

    gid: str
    x0: NDArray[np.float64]
    x1: NDArray[np.float64]
    y0: NDArray[np.float64]
    y1: NDArray[np.float64]
    fill: str = "none"
    edge: Stroke | None = None
    hatch: bool = False
    opacity: float = 1.0
    label: str | None = None
    z: float = 1.0


@dataclass(frozen=True)
class Segments:
    """Separate straight segments from (x0, y0) to (x1, y1) in data units."""

    gid: str
    x0: NDArray[np.float64]
    y0: NDArray[np.float64]
    x1: NDArray[np.float64]
    y1: NDArray[np.float64]
    stroke: Stroke
    label: str | None = None
    z: float = 1.0


@dataclass(frozen=True)
class Arrow:
    """A double-headed arrow from (x0, y) to (x1, y) in data units."""

    gid: str
    x0: float
    x1: float
    y: float
    stroke: Stroke
    z: float = 3.0


@dataclass(frozen=True)
class Note:
    """Text at (x, y), shifted by (dx, dy) [pt, dy upwards]; ``coords`` "data" or "axes"
    (fractions of the axes); ``halo`` draws a white edge behind the letters so a line under
    them does not hide them."""

    text: str
    x: float
    y: float
    dx: float = 0.0
    dy: float = 0.0
    anchor: Anchor = "start"
    size: float = _TICK_PT
    halo: bool = False
    coords: Literal["data", "axes"] = "data"


Mark = Line | Points | Band | Rule | Rects | Segments | Arrow


@dataclass
class Scale:
    """One axis: limits, kind and label.

    ``ticks``/``tick_labels`` fix the ticks (labelled categories); otherwise they come from
    :func:`linear_ticks` or, with ``log``, :func:`log_ticks`.
    """

    low: float = 0.0
    high: float = 1.0
    log: bool = False
    label: str = ""
    ticks: tuple[float, ...] | None = None
    tick_labels: tuple[str, ...] | None = None
    tick_size: float = _TICK_PT

    def fraction(self, value: ArrayLike) -> NDArray[np.float64]:
        """Position along the axis, 0 at ``low`` and 1 at ``high`` [unitless]."""
        v = np.asarray(value, dtype=float)
        if self.log:
            with np.errstate(divide="ignore", invalid="ignore"):
                low, high = math.log10(self.low), math.log10(self.high)
                result: NDArray[np.float64] = (np.log10(v) - low) / (high - low)
                return result
        span = self.high - self.low
        linear: NDArray[np.float64] = (v - self.low) / (span if span else 1.0)
        return linear

    def layout(self) -> tuple[list[float], list[str], list[float], str]:
        """Major tick values, their labels, minor tick values and the axis's power of ten
        (``"×10⁻⁴"`` when the labels are scaled by it, else empty)."""
        if self.ticks is not None:
            labels = list(self.tick_labels or (f"{t:g}" for t in self.ticks))
            return list(self.ticks), labels, [], ""
        if self.log:
            major, minor = log_ticks(self.low, self.high)
            return major, [power_label(t) for t in major], minor, ""
        major = linear_ticks(self.low, self.high)
        labels, offset = linear_labels(major)
        return major, labels, [], offset


@dataclass(frozen=True)
class TopAxis:
    """A second x scale along the top: ``value = intercept + slope * x`` (``slope`` > 0)."""

    intercept: float
    slope: float
    label: str


@dataclass
class Chart:
    """One figure: a title, one axes with its marks and notes, a legend below.

    Parameters
    ----------
    name
        Prefix of the SVG's ids (the file stem), so figures inlined together stay apart.
    height_in
        Height [in] without the legend's rows (they are added under it).
    """

    name: str
    height_in: float
    title: str = ""
    x: Scale = field(default_factory=Scale)
    y: Scale = field(default_factory=Scale)
    top: TopAxis | None = None
    grid: bool = False
    legend_columns: int = 2
    marks: list[Mark] = field(default_factory=list)
    notes: list[Note] = field(default_factory=list)

    def add(self, mark: Mark) -> None:
        self.marks.append(mark)

    def note(self, note: Note) -> None:
        self.notes.append(note)

    def find(self, gid: str) -> list[Mark]:
        """The marks named ``gid``, in the order they were added."""
        return [mark for mark in self.marks if mark.gid == gid]

    def one(self, gid: str) -> Mark:
        """The one mark named ``gid`` (``LookupError`` when there is none or several)."""
        found = self.find(gid)
        if len(found) != 1:
            raise LookupError(f"expected one mark {gid!r}, found {len(found)}")
        return found[0]

    def legend(self) -> list[tuple[str, Mark]]:
        """The legend's entries: each labelled mark, in the order added."""
        return [(label, mark) for mark in self.marks if (label := _label(mark))]

    def svg(self) -> bytes:
        """The figure as SVG bytes (UTF-8)."""
        return _Render(self).document().encode("utf-8")


def _label(mark: Mark) -> str | None:
    return None if isinstance(mark, Arrow) else mark.label


# ---------------------------------------------------------------------------------------------
# Ticks
# ---------------------------------------------------------------------------------------------

_STEPS = (1.0, 2.0, 2.5, 5.0, 10.0)


def linear_ticks(low: float, high: float, bins: int = 6) -> list[float]:
    """At most ``bins + 1`` round values covering [low, high] (steps 1, 2, 2.5 or 5 times a
    power of ten), those inside the interval."""
    if not (math.isfinite(low) and math.isfinite(high)) or high <= low:
        return [low]
    raw = (high - low) / bins
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(s * power for s in _STEPS if s * power >= raw * (1 - 1e-9))
    first = math.ceil(low / step - 1e-9)
    last = math.floor(high / step + 1e-9)
    return [_clean(k * step) for k in range(first, last + 1)]


def _clean(value: float) -> float:
    """A tick value without the round-off of k * step (0.30000000000000004 -> 0.3)."""
    return 0.0 if value == 0 else float(f"{value:.12g}")


def linear_labels(ticks: Sequence[float]) -> tuple[list[str], str]:
    """Labels of linear ticks, with as many decimals as their step needs, and the power of
    ten they are scaled by (``"×10⁻⁴"``) when the largest is below 0.01 or from 1e5 up."""
    if not ticks:
        return [], ""
    largest = max(abs(t) for t in ticks)
    exponent = math.floor(math.log10(largest)) if largest > 0 else 0
    scale_exponent = exponent if (exponent < -2 or exponent > 4) else 0
    scaled = [t / 10.0**scale_exponent for t in ticks]
    step = min((b - a for a, b in itertools.pairwise(scaled)), default=1.0)
    decimals = 0
    while decimals < 8 and any(
        abs(v - round(v, decimals)) > 1e-6 * max(step, 1e-300) for v in scaled
    ):
        decimals += 1
    labels = [_minus(f"{v:.{decimals}f}") for v in scaled]
    return labels, ("×" + power_of_ten(scale_exponent) if scale_exponent else "")


def _minus(text: str) -> str:
    """A typographic minus sign, and no "-0"."""
    if text.lstrip("-").strip("0.") == "":
        text = text.lstrip("-")
    return text.replace("-", "−")


def log_ticks(low: float, high: float) -> tuple[list[float], list[float]]:
    """Major ticks at the powers of ten in [low, high] (every second one past eight, 1, 2
    and 5 times them when fewer than two fall inside) and minor ticks at 2 to 9 times them."""
    first, last = math.floor(math.log10(low)), math.ceil(math.log10(high))
    decades = [10.0**e for e in range(first, last + 1)]
    inside = [d for d in decades if low * (1 - 1e-9) <= d <= high * (1 + 1e-9)]
    if len(inside) < 2:
        major = [d * m for d in decades for m in (1, 2, 5)]
        major = [v for v in major if low * (1 - 1e-9) <= v <= high * (1 + 1e-9)]
        minor = [d * m for d in decades for m in (3, 4, 6, 7, 8, 9)]
    else:
        stride = 2 if len(inside) > 8 else 1
        major = inside[::stride]
        minor = [d * m for d in decades for m in range(2, 10)]
    minor = [v for v in minor if low <= v <= high]
    return major, minor


# ---------------------------------------------------------------------------------------------
# Text widths
# ---------------------------------------------------------------------------------------------

# Advance widths of a sans-serif face, in em, by character class (read off the DejaVu Sans
# metrics, rounded; from memory): the layout only needs them to a few per cent.
_NARROW = set("iljI.,:;'|!·")
_WIDE = set("mwMW—×−")
_MEDIUM = set(' ()[]/-–tfr"*⁰¹²³⁴⁵⁶⁷⁸⁹⁻')


def text_width(text: str, size: float) -> float:
    """Estimated width [pt] of ``text`` at ``size`` [pt] in the figures' sans-serif face."""
    em = 0.0
    for ch in text:
        if ch in _NARROW:
            em += 0.3
        elif ch in _WIDE:
            em += 0.87
        elif ch in _MEDIUM:
            em += 0.4
        elif ch.isupper():
            em += 0.7
        else:
            em += 0.61
    return em * size


# ---------------------------------------------------------------------------------------------
# Rendering
# ---------------------------------------------------------------------------------------------


def _n(value: float) -> str:
    """A coordinate with two decimals, without trailing zeros."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _stroke_attributes(stroke: Stroke) -> str:
    parts = [f'stroke="{stroke.color}"', f'stroke-width="{_n(stroke.width)}"']
    if stroke.dash:
        parts.append(f'stroke-dasharray="{" ".join(_n(d) for d in stroke.dash)}"')
    return " ".join(parts)


def _path(d: str, stroke: Stroke) -> str:
    return f'<path d="{d}" {_stroke_attributes(stroke)} fill="none"/>'


def _text(
    x: float,
    y: float,
    text: str,
    size: float,
    *,
    anchor: Anchor = "start",
    middle: bool = False,
    rotate: bool = False,
    halo: bool = False,
    extra: str = "",
) -> str:
    attributes = [f'x="{_n(x)}"', f'y="{_n(y)}"', f'font-size="{_n(size)}"']
    if anchor != "start":
        attributes.append(f'text-anchor="{anchor}"')
    if middle:
        attributes.append('dominant-baseline="central"')
    if rotate:
        attributes.append(f'transform="rotate(-90 {_n(x)} {_n(y)})"')
    if halo:
        attributes.append(
            'stroke="#ffffff" stroke-width="3" stroke-linejoin="round" paint-order="stroke"'
        )
    if extra:
        attributes.append(extra)
    return f"<text {' '.join(attributes)}>{escape(text)}</text>"


class _Render:
    """The layout of one chart and its SVG text."""

    def __init__(self, chart: Chart) -> None:
        self.chart = chart
        self.width = WIDTH_IN * _PT_PER_IN
        self.x_ticks = chart.x.layout()
        self.y_ticks = chart.y.layout()
        self.top_ticks = self._top_layout()
        entries = chart.legend()
        self.columns = self._columns(entries)
        rows = math.ceil(len(entries) / self.columns) if entries else 0
        self.height = chart.height_in * _PT_PER_IN + (rows * _LEGEND_ROW + 10.0 if rows else 0.0)
        y_label_width = max(
            (text_width(t, chart.y.tick_size) for t in self.y_ticks[1]), default=0.0
        )
        self.left = 8.0 + (_LABEL_PT * 1.3 if chart.y.label else 0.0) + y_label_width + 8.0
        self.right = self.width - 14.0
        top = 8.0 + (_TITLE_PT * 1.5 if chart.title else 0.0)
        if self.y_ticks[3]:
            top += _TICK_PT * 1.3
        if chart.top is not None:
            top += _TICK_LENGTH + _PAD + _TICK_PT + 4.0 + _TICK_PT * 1.3
        self.top = top
        self.legend_top = chart.height_in * _PT_PER_IN
        below = _TICK_LENGTH + _PAD + _TICK_PT * 1.2 + 5.0
        below += _LABEL_PT * 1.3 if chart.x.label else 0.0
        self.bottom = self.legend_top - below - 6.0
        self.entries = entries
        self.clip = f"{chart.name}-axes"

    def _top_layout(self) -> tuple[list[float], list[str]]:
        top = self.chart.top
        if top is None:
            return [], []
        low = top.intercept + top.slope * self.chart.x.low
        high = top.intercept + top.slope * self.chart.x.high
        values = linear_ticks(low, high)
        labels, _ = linear_labels(values)
        return [(v - top.intercept) / top.slope for v in values], labels

    def _columns(self, entries: list[tuple[str, Mark]]) -> int:
        """The most columns, up to the chart's, whose widest entries fit side by side."""
        widths = [_LEGEND_HANDLE + text_width(label, _LEGEND_PT) for label, _ in entries]
        for columns in range(max(1, self.chart.legend_columns), 1, -1):
            if sum(_column_widths(widths, columns)) <= self.width - 24.0:
                return columns
        return 1

    # Positions -------------------------------------------------------------------------------

    # Positions far outside the page are pulled in to this distance [pt] (the clip hides them
    # either way), so no renderer meets a huge coordinate; NaN stays NaN and is left out.
    _FAR = 1000.0

    def px(self, x: ArrayLike) -> NDArray[np.float64]:
        position = self.left + self.chart.x.fraction(x) * (self.right - self.left)
        result: NDArray[np.float64] = np.clip(position, -self._FAR, self.width + self._FAR)
        return result

    def py(self, y: ArrayLike) -> NDArray[np.float64]:
        position = self.bottom - self.chart.y.fraction(y) * (self.bottom - self.top)
        result: NDArray[np.float64] = np.clip(position, -self._FAR, self.height + self._FAR)
        return result

    # Document --------------------------------------------------------------------------------

    def document(self) -> str:
        chart = self.chart
        parts = [
            '<?xml version="1.0" encoding="utf-8"?>',
            f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{_n(self.width)}pt" '
            f'height="{_n(self.height)}pt" viewBox="0 0 {_n(self.width)} {_n(self.height)}" '
            f'role="img" aria-labelledby="{chart.name}-title" font-family={quoteattr(FONT_FAMILY)} '
            f'fill="{INK}">',
            f'<title id="{chart.name}-title">{escape(chart.title or chart.name)}</title>',
            "<defs>",
            f'<clipPath id="{self.clip}"><rect x="{_n(self.left)}" y="{_n(self.top)}" '
            f'width="{_n(self.right - self.left)}" height="{_n(self.bottom - self.top)}"/>'
            "</clipPath>",
            f'<pattern id="{chart.name}-hatch" patternUnits="userSpaceOnUse" width="5" height="5" '
            f'patternTransform="rotate(45)"><line x1="0" y1="0" x2="0" y2="5" stroke="{HATCH}" '
            'stroke-width="0.7"/></pattern>',
            "</defs>",
            f'<rect width="{_n(self.width)}" height="{_n(self.height)}" fill="#ffffff"/>',
        ]
        if chart.grid:
            parts.append(self._grid())
        for mark in sorted(chart.marks, key=lambda m: m.z):  # stable: ties keep their order
            if self._usable(mark):
                parts.append(self._mark(mark))
        parts.append(self._frame())
        parts.extend(self._note(note) for note in chart.notes)
        if chart.title:
            parts.append(
                _text(self.left, 8.0 + _TITLE_PT, chart.title, _TITLE_PT, extra='class="title"')
            )
        parts.append(self._legend())
        parts.append("</svg>")
        return "\n".join(part for part in parts if part) + "\n"

    def _grid(self) -> str:
        lines = []
        for value in self.x_ticks[0]:
            x = float(self.px(value))
            lines.append(f"M{_n(x)} {_n(self.top)}V{_n(self.bottom)}")
        for value in self.y_ticks[0]:
            y = float(self.py(value))
            lines.append(f"M{_n(self.left)} {_n(y)}H{_n(self.right)}")
        return (
            f'<path class="grid" d="{"".join(lines)}" stroke="{BAND}" stroke-width="0.8" '
            'fill="none"/>'
        )

    def _group(self, mark: Mark, body: str, *, clip: bool = True) -> str:
        clip_attribute = f' clip-path="url(#{self.clip})"' if clip else ""
        return f'<g class="series" data-gid={quoteattr(mark.gid)}{clip_attribute}>{body}</g>'

    def _fill(self, fill: str, hatch: bool) -> str:
        return f"url(#{self.chart.name}-hatch)" if hatch else fill

    def _mark(self, mark: Mark) -> str:
        """One mark's SVG; parts at a non-finite value (NaN, or 0 on a log axis) are left out."""
        if isinstance(mark, Line):
            return self._group(mark, self._polyline(mark.x, mark.y, mark.stroke))
        if isinstance(mark, Points):
            xs, ys = self.px(mark.x), self.py(mark.y)
            body = "".join(
                _marker(mark, float(x), float(y))
                for x, y in zip(xs, ys, strict=True)
                if math.isfinite(x) and math.isfinite(y)
            )
            return self._group(mark, body, clip=False)
        if isinstance(mark, Band):
            return self._group(mark, self._band(mark))
        if isinstance(mark, Rule):
            if not math.isfinite(float((self.px if mark.axis == "x" else self.py)(mark.value))):
                return ""
            if mark.axis == "x":
                x = float(self.px(mark.value))
                d = f"M{_n(x)} {_n(self.top)}V{_n(self.bottom)}"
            else:
                y = float(self.py(mark.value))
                d = f"M{_n(self.left)} {_n(y)}H{_n(self.right)}"
            return self._group(mark, _path(d, mark.stroke))
        if isinstance(mark, Rects):
            x0, x1 = self.px(mark.x0), self.px(mark.x1)
            y0, y1 = self.py(mark.y0), self.py(mark.y1)
            edge = _stroke_attributes(mark.edge) if mark.edge else 'stroke="none"'
            opacity = f' fill-opacity="{_n(mark.opacity)}"' if mark.opacity < 1 else ""
            body = "".join(
                f'<rect x="{_n(min(a, b))}" y="{_n(min(c, d))}" width="{_n(abs(b - a))}" '
                f'height="{_n(abs(d - c))}"/>'
                for a, b, c, d in zip(x0, x1, y0, y1, strict=True)
                if _finite(a, b, c, d)
            )
            fill = self._fill(mark.fill, mark.hatch)
            return self._group(mark, f'<g fill="{fill}"{opacity} {edge}>{body}</g>')
        if isinstance(mark, Segments):
            ends = zip(
                self.px(mark.x0), self.py(mark.y0), self.px(mark.x1), self.py(mark.y1), strict=True
            )
            d = "".join(
                f"M{_n(a)} {_n(b)}L{_n(c)} {_n(e)}" for a, b, c, e in ends if _finite(a, b, c, e)
            )
            return self._group(mark, _path(d, mark.stroke))
        return self._group(mark, self._arrow(mark), clip=False)

    def _usable(self, mark: Mark) -> bool:
        """False for a band with an edge, or an arrow with an end, at no position (NaN) and
        for an arrow to infinity."""
        x, y = self.chart.x, self.chart.y
        if isinstance(mark, Band):
            scale = x if mark.axis == "x" else y
            return not np.isnan(scale.fraction([mark.low, mark.high])).any()
        if isinstance(mark, Arrow):
            ends = np.append(x.fraction([mark.x0, mark.x1]), y.fraction(mark.y))
            return bool(np.isfinite(ends).all())
        return True

    def _polyline(self, x: ArrayLike, y: ArrayLike, stroke: Stroke) -> str:
        xs, ys = self.px(x), self.py(y)
        runs: list[str] = []
        pen_up = True
        for a, b in zip(xs, ys, strict=True):
            if not (math.isfinite(a) and math.isfinite(b)):
                pen_up = True
                continue
            runs.append(f"{'M' if pen_up else 'L'}{_n(a)} {_n(b)}")
            pen_up = False
        return (
            f'<path d="{"".join(runs)}" {_stroke_attributes(stroke)} fill="none" '
            'stroke-linejoin="round"/>'
        )

    def _band(self, band: Band) -> str:
        if band.axis == "y":
            y0, y1 = float(self.py(band.high)), float(self.py(band.low))
            x0, x1 = self.left, self.right
        else:
            x0, x1 = float(self.px(band.low)), float(self.px(band.high))
            y0, y1 = self.top, self.bottom
        fill = self._fill(band.fill, band.hatch)
        rect = (
            f'<rect x="{_n(x0)}" y="{_n(y0)}" width="{_n(x1 - x0)}" height="{_n(y1 - y0)}" '
            f'fill="{fill}" stroke="none"/>'
        )
        if band.edge is None:
            return rect
        if band.axis == "y":
            d = f"M{_n(x0)} {_n(y0)}H{_n(x1)}M{_n(x0)} {_n(y1)}H{_n(x1)}"
        else:
            d = f"M{_n(x0)} {_n(y0)}V{_n(y1)}M{_n(x1)} {_n(y0)}V{_n(y1)}"
        return rect + f'<path d="{d}" {_stroke_attributes(band.edge)} fill="none"/>'

    def _arrow(self, arrow: Arrow) -> str:
        y = float(self.py(arrow.y))
        a, b = float(self.px(arrow.x0)), float(self.px(arrow.x1))
        head = 6.0
        color = arrow.stroke.color
        return (
            f'<path d="M{_n(a + head)} {_n(y)}H{_n(b - head)}" {_stroke_attributes(arrow.stroke)}/>'
            f'<path d="M{_n(a)} {_n(y)}l{_n(head)} -3v6z M{_n(b)} {_n(y)}l-{_n(head)} -3v6z" '
            f'fill="{color}" stroke="none"/>'
        )

    def _frame(self) -> str:
        chart = self.chart
        parts = [
            f'<rect x="{_n(self.left)}" y="{_n(self.top)}" width="{_n(self.right - self.left)}" '
            f'height="{_n(self.bottom - self.top)}" fill="none" stroke="{INK}" stroke-width="0.8"/>'
        ]
        ticks: list[str] = []
        labels: list[str] = []
        major, texts, minor, offset = self.x_ticks
        label_y = self.bottom + _TICK_LENGTH + _PAD + _TICK_PT
        for value, text in zip(major, texts, strict=True):
            x = float(self.px(value))
            ticks.append(f"M{_n(x)} {_n(self.bottom)}v{_n(_TICK_LENGTH)}")
            labels.append(_text(x, label_y, text, chart.x.tick_size, anchor="middle"))
        for value in minor:
            ticks.append(f"M{_n(float(self.px(value)))} {_n(self.bottom)}v2")
        x_label_y = label_y + 5.0 + _LABEL_PT * 1.1
        if chart.x.label:
            labels.append(
                _text(
                    (self.left + self.right) / 2,
                    x_label_y,
                    chart.x.label,
                    _LABEL_PT,
                    anchor="middle",
                    extra='class="axis-label"',
                )
            )
        if offset:
            labels.append(_text(self.right, x_label_y, offset, _TICK_PT, anchor="end"))
        major, texts, minor, offset = self.y_ticks
        for value, text in zip(major, texts, strict=True):
            y = float(self.py(value))
            ticks.append(f"M{_n(self.left)} {_n(y)}h-{_n(_TICK_LENGTH)}")
            labels.append(
                _text(
                    self.left - _TICK_LENGTH - _PAD,
                    y,
                    text,
                    chart.y.tick_size,
                    anchor="end",
                    middle=True,
                )
            )
        for value in minor:
            ticks.append(f"M{_n(self.left)} {_n(float(self.py(value)))}h-2")
        if chart.y.label:
            centre = (self.top + self.bottom) / 2
            labels.append(
                _text(
                    8.0 + _LABEL_PT,
                    centre,
                    chart.y.label,
                    _LABEL_PT,
                    anchor="middle",
                    rotate=True,
                    extra='class="axis-label"',
                )
            )
        if offset:
            labels.append(_text(self.left, self.top - 4.0, offset, _TICK_PT))
        if chart.top is not None:
            values, texts = self.top_ticks
            top_label_y = self.top - _TICK_LENGTH - _PAD
            for value, text in zip(values, texts, strict=True):
                x = float(self.px(value))
                ticks.append(f"M{_n(x)} {_n(self.top)}v-{_n(_TICK_LENGTH)}")
                labels.append(_text(x, top_label_y, text, chart.x.tick_size, anchor="middle"))
            labels.append(
                _text(
                    (self.left + self.right) / 2,
                    top_label_y - _TICK_PT - 4.0,
                    chart.top.label,
                    _TICK_PT,
                    anchor="middle",
                    extra='class="axis-label"',
                )
            )
        parts.append(f'<path d="{"".join(ticks)}" stroke="{INK}" stroke-width="0.8" fill="none"/>')
        parts.append(f'<g class="labels">{"".join(labels)}</g>')
        return "\n".join(parts)

    def _note(self, note: Note) -> str:
        if note.coords == "axes":
            x = self.left + note.x * (self.right - self.left)
            y = self.bottom - note.y * (self.bottom - self.top)
        else:
            x, y = float(self.px(note.x)), float(self.py(note.y))
        if not _finite(x, y):
            return ""
        return _text(
            x + note.dx,
            y - note.dy,
            note.text,
            note.size,
            anchor=note.anchor,
            middle=True,
            halo=note.halo,
        )

    def _legend(self) -> str:
        if not self.entries:
            return ""
        widths = [_LEGEND_HANDLE + text_width(label, _LEGEND_PT) for label, _ in self.entries]
        used = _column_widths(widths, self.columns)
        lefts = [max(12.0, (self.width - sum(used)) / 2)]
        for width in used[:-1]:
            lefts.append(lefts[-1] + width)
        parts = ['<g class="legend">']
        for index, (label, mark) in enumerate(self.entries):
            row, column = divmod(index, self.columns)
            x = lefts[column]
            y = self.legend_top + 4.0 + (row + 0.5) * _LEGEND_ROW
            parts.append(self._handle(mark, x, y))
            parts.append(_text(x + 26.0, y, label, _LEGEND_PT, middle=True))
        parts.append("</g>")
        return "".join(parts)

    def _handle(self, mark: Mark, x: float, y: float) -> str:
        if isinstance(mark, Line | Rule | Segments):
            return f'<path d="M{_n(x)} {_n(y)}h20" {_stroke_attributes(mark.stroke)} fill="none"/>'
        if isinstance(mark, Points):
            return _marker(mark, x + 10.0, y)
        if isinstance(mark, Band | Rects):
            edge = _stroke_attributes(mark.edge) if mark.edge else 'stroke="none"'
            fill = self._fill(mark.fill, mark.hatch)
            opacity = (
                f' fill-opacity="{_n(mark.opacity)}"'
                if isinstance(mark, Rects) and mark.opacity < 1
                else ""
            )
            return (
                f'<rect x="{_n(x + 1)}" y="{_n(y - 4.5)}" width="18" height="9" fill="{fill}"'
                f"{opacity} {edge}/>"
            )
        return ""


def _finite(*values: float) -> bool:
    return all(math.isfinite(v) for v in values)


def _column_widths(widths: Sequence[float], columns: int) -> list[float]:
    """Width [pt] of each legend column (its widest entry and a gap), entries row by row."""
    return [
        max(widths[i] for i in range(c, len(widths), columns)) + _LEGEND_GAP
        for c in range(min(columns, len(widths)))
    ]


def _marker(mark: Points, x: float, y: float) -> str:
    r = mark.size / 2
    style = f'fill="{mark.face}" stroke="{mark.edge}" stroke-width="{_n(mark.edge_width)}"'
    if mark.marker == "o":
        return f'<circle cx="{_n(x)}" cy="{_n(y)}" r="{_n(r)}" {style}/>'
    if mark.marker == "s":
        s = r * 0.9
        return (
            f'<rect x="{_n(x - s)}" y="{_n(y - s)}" width="{_n(2 * s)}" height="{_n(2 * s)}" '
            f"{style}/>"
        )
    return (
        f'<path d="M{_n(x)} {_n(y - r)}L{_n(x + r * 0.8)} {_n(y)}L{_n(x)} {_n(y + r)}'
        f'L{_n(x - r * 0.8)} {_n(y)}z" {style}/>'
    )


def steps(edges: ArrayLike, counts: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The outline of a histogram: x and y of the step line over bins ``edges`` with
    ``counts`` (from zero at the first edge to zero at the last)."""
    e = np.asarray(edges, dtype=float)
    c = np.asarray(counts, dtype=float)
    x = np.repeat(e, 2)
    y = np.concatenate([[0.0], np.repeat(c, 2), [0.0]])
    return x, y


def array(values: ArrayLike) -> NDArray[np.float64]:
    """Data for a mark: a float array (copied)."""
    return np.array(values, dtype=float)
