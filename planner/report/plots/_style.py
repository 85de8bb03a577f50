"""The figures' shared style: palette, matplotlib settings, axes helpers, PNG and SVG bytes.

See :mod:`planner.report.plots` for the choices behind them.
"""

from __future__ import annotations

import io
import math
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

import numpy as np

from planner.report._format import plain

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure


# Palette, with relative luminance (what greyscale keeps): ink 0.02, slate teal 0.09, rust
# 0.09, ochre 0.42, pale blue-grey band 0.79, rule grey 0.19.
_INK = "#1c2830"
_TEAL = "#1f5c63"
_RUST = "#7a4a12"
_OCHRE = "#d9a441"
_BAND = "#dfe8eb"
_RULE = "#6b7b83"
_WIDTH_IN = 6.6
# Behind point labels, so a line under a label never makes it hard to read.
_LABEL_BOX = {"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none"}
_PNG_DPI = 150

_RC: dict[str, Any] = {
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 10.0,
    "axes.titlesize": 11.0,
    "axes.labelsize": 10.5,
    "xtick.labelsize": 9.5,
    "ytick.labelsize": 9.5,
    "legend.fontsize": 9.0,
    "axes.edgecolor": _INK,
    "axes.labelcolor": _INK,
    "text.color": _INK,
    "xtick.color": _INK,
    "ytick.color": _INK,
    "axes.prop_cycle": f"cycler(color=['{_TEAL}', '{_RUST}', '{_OCHRE}', '{_INK}'])",
    # Tick labels are formatted here with Unicode superscripts (see _power_label): matplotlib's
    # mathtext parser, built on first use, measured at most of a second per run.
    "axes.formatter.use_mathtext": False,
    "hatch.color": _RULE,
    "hatch.linewidth": 0.6,
    # Layout is chosen per figure (constrained, then fixed); a matplotlibrc must not add one.
    "figure.autolayout": False,
    "figure.constrained_layout.use": False,
    "svg.fonttype": "none",
    # A fixed salt makes the SVG's clip-path ids the same on every run (otherwise random).
    "svg.hashsalt": "planner-plots",
    "svg.id": None,
}


@contextmanager
def _style() -> Iterator[None]:
    import matplotlib

    settings: Any = _RC  # rc_context's stub lists every key as a Literal; ours are a subset
    with matplotlib.rc_context(settings):
        yield


def _new_figure(height_in: float) -> tuple[Figure, Axes]:
    """A figure of the standard width; ``height_in`` [in] excludes the legend rows."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=(_WIDTH_IN, height_in), dpi=_PNG_DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure, figure.add_subplot()


def _text(text: str) -> str:
    """Free text (species names, ids) safe from matplotlib's ``$...$`` mathtext."""
    return text.replace("$", r"\$")


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def _power(exponent: int) -> str:
    return "10" + str(exponent).translate(_SUPERSCRIPT)


def _power_label(value: float, _position: object = None) -> str:
    """A value as ``1.92×10⁻⁴``, ``10⁻³`` or ``0``, with Unicode superscripts."""
    if value == 0 or not math.isfinite(value):
        return "0"
    exponent = math.floor(math.log10(abs(value)) + 1e-9)
    mantissa = float(f"{value / 10.0**exponent:.3g}")
    if mantissa >= 10.0:
        mantissa, exponent = mantissa / 10.0, exponent + 1
    if exponent in (0, 1, 2):
        return f"{mantissa * 10.0**exponent:.3g}"
    if abs(mantissa - 1.0) < 1e-9:
        return _power(exponent)
    return f"{mantissa:.3g}×{_power(exponent)}"


def _concentration_axis(axis: Any, *, log: bool) -> None:
    """Concentration ticks [mol/L]: powers of ten on a log axis; on a linear axis, plain
    numbers with the shared power of ten written at the end of the axis (``×10⁻⁴``).

    Call it after the axis limits are set. matplotlib's mathtext is avoided (see ``_RC``).
    """
    from matplotlib.ticker import FuncFormatter, LogLocator, MaxNLocator, NullFormatter

    if log:
        axis.set_major_formatter(FuncFormatter(_power_label))
        axis.set_major_locator(LogLocator(base=10.0, numticks=12))
        axis.set_minor_formatter(NullFormatter())
        return
    high = max(abs(v) for v in axis.get_view_interval())
    exponent = math.floor(math.log10(high)) if high > 0 else 0
    if exponent in (-1, 0, 1, 2):
        exponent = 0
    scale = 10.0**exponent
    formatter = FuncFormatter(lambda value, _position: f"{value / scale:g}")
    if exponent:
        formatter.set_offset_string("×" + _power(exponent))
    axis.set_major_locator(MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]))
    axis.set_major_formatter(formatter)


# Legend entries longer than this many characters get one column, so none is cut off at the
# figure's edge (two columns of 9 pt text fit about 42 characters each in 6.6 in).
_TWO_COLUMN_CHARS = 42
# Height of one legend row at 9 pt [in].
_LEGEND_ROW_IN = 0.22


def _finish(figure: Figure, axes: Axes, columns: int = 2) -> Figure:
    """Put the legend under the axes, grow the figure to hold it, and fix the layout once.

    ``columns`` is the most legend columns; long entries get fewer. The layout is computed
    by one Agg draw at the PNG resolution, whose pixels :func:`_both` then encodes as the
    PNG; constrained layout would otherwise run again on every save (it is about half of the
    drawing time). Positions are fractions of the figure, so one layout serves PNG and SVG.
    """
    handles, labels = axes.get_legend_handles_labels()
    if handles:
        longest = max(len(label) for label in labels)
        if columns > 1 and longest * columns > _TWO_COLUMN_CHARS * 2:
            columns = max(1, (_TWO_COLUMN_CHARS * 2) // longest)
        rows = math.ceil(len(handles) / columns)
        width, height = figure.get_size_inches()
        figure.set_size_inches(width, height + rows * _LEGEND_ROW_IN)
        figure.legend(handles, labels, loc="outside lower center", ncols=columns, frameon=False)
    figure.canvas.draw()
    # No layout engine at all from here on ("none" would leave a placeholder engine, for
    # which savefig draws the figure once more before saving); with figure.autolayout and
    # figure.constrained_layout.use off (_RC), None means exactly that.
    figure.set_layout_engine(None)
    return figure


def _amount(value: float) -> str:
    """A concentration for a label: ``0.25``, ``0.0643`` or ``1.92×10⁻⁴`` (3 figures)."""
    if 1e-2 <= abs(value) < 1e4:
        return plain(value, 3)
    return _power_label(value)


def figure_png(figure: Figure, *, dpi: int = _PNG_DPI) -> bytes:
    """A figure as PNG bytes, without the software tag (so the bytes do not name versions).

    Parameters
    ----------
    figure
        From one of the ``*_figure`` functions.
    dpi
        Resolution [dots per inch].
    """
    buffer = io.BytesIO()
    with _style():
        figure.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
    return buffer.getvalue()


def figure_svg(figure: Figure) -> bytes:
    """A figure as SVG bytes: text as text, fixed ids, no date, no version string."""
    buffer = io.BytesIO()
    with _style():
        figure.savefig(buffer, format="svg", metadata={"Date": None, "Creator": "planner"})
    return buffer.getvalue()


def _both(stem: str, figure: Figure) -> dict[str, bytes]:
    """PNG and SVG of a figure just finished by :func:`_finish`.

    The PNG is the canvas that :func:`_finish` drew, encoded as ``savefig`` would encode it
    (the same call matplotlib's Agg backend makes), so the figure is drawn twice, not three
    times; the bytes equal :func:`figure_png`'s.
    """
    from matplotlib.image import imsave

    canvas: Any = figure.canvas
    assert figure.dpi == _PNG_DPI
    # None drops the entry, as in savefig; imsave's stub allows only str values.
    no_software: Any = {"Software": None}
    buffer = io.BytesIO()
    imsave(
        buffer,
        np.asarray(canvas.buffer_rgba()),
        format="png",
        origin="upper",
        dpi=_PNG_DPI,
        metadata=no_software,
    )
    return {f"{stem}.png": buffer.getvalue(), f"{stem}.svg": figure_svg(figure)}
