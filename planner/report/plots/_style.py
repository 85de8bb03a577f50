"""The figures' shared style: palette, face, width and the number formats of their labels.

See :mod:`planner.report.plots` for the choices behind them.
"""

from __future__ import annotations

import math

from planner.report._format import plain

# Palette, with relative luminance (what greyscale keeps): ink 0.02, slate teal 0.09, rust
# 0.09, ochre 0.42, pale blue-grey band 0.79, rule grey 0.19.
INK = "#1c2830"
TEAL = "#1f5c63"
RUST = "#7a4a12"
OCHRE = "#d9a441"
BAND = "#dfe8eb"
RULE = "#6b7b83"
HATCH = RULE
#: Width of every figure [in]: 168 mm, inside the A4 printable width.
WIDTH_IN = 6.6
#: The faces asked for, in order; every system has the generic last one.
FONT_FAMILY = "'DejaVu Sans', 'Liberation Sans', Arial, Helvetica, sans-serif"

_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def power_of_ten(exponent: int) -> str:
    """``10⁻⁴``: a power of ten with Unicode superscripts."""
    return "10" + str(exponent).translate(_SUPERSCRIPT)


def power_label(value: float) -> str:
    """A value as ``1.92×10⁻⁴``, ``10⁻³``, ``250`` or ``0``, with Unicode superscripts."""
    if value == 0 or not math.isfinite(value):
        return "0"
    exponent = math.floor(math.log10(abs(value)) + 1e-9)
    mantissa = float(f"{value / 10.0**exponent:.3g}")
    if mantissa >= 10.0:
        mantissa, exponent = mantissa / 10.0, exponent + 1
    if exponent in (0, 1, 2):
        return f"{mantissa * 10.0**exponent:.3g}"
    if abs(mantissa - 1.0) < 1e-9:
        return power_of_ten(exponent)
    return f"{mantissa:.3g}×{power_of_ten(exponent)}"


def amount(value: float) -> str:
    """A concentration for a label: ``0.25``, ``0.0643`` or ``1.92×10⁻⁴`` (3 figures)."""
    if 1e-2 <= abs(value) < 1e4:
        return plain(value, 3)
    return power_label(value)
