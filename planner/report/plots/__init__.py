"""Figures of a plan and of its virtual class: matplotlib figures, PNG and SVG bytes.

The package holds one module per job: :mod:`._style` (palette, settings, helpers, bytes),
:mod:`.plan` (the plan figures) and :mod:`.simulation` (the virtual class's figures); the
figures draw numbers the core computed (the bound-fraction sweep comes from
:func:`planner.forward.bound_fraction_sweep`) and do no chemistry of their own.

Plan figures (written by ``planner plan --out`` into ``plots/``, shown on the answer key):

- :func:`ladder_figure`: the planned calibration ladder, predicted reading against the
  coloured product's concentration, with the linear window, the Beer-Lambert line and the
  photometer's stray-light response, the blank and the standards;
- :func:`bound_fraction_figure`: bound fraction of the limiting reagent against the total
  excess concentration (equilibrium solver over a sweep), the tolerance line of the
  all-bound assumption and the plan's standards;
- :func:`coverage_figure`: the bound fractions of the test mixtures against the informative
  range 0.2-0.8 and the design's range.

Virtual-class figures (``planner simulate --out``): :func:`histogram_figure` for K or eps by
analysis, with :func:`k_histogram_png` and :func:`epsilon_histogram_png` as shortcuts.

Every figure is a :class:`matplotlib.figure.Figure` on an Agg canvas: nothing touches pyplot's
global figure list or a display. matplotlib is imported inside the functions, so importing this
module costs nothing until a figure is drawn (``planner plan`` without ``--out`` never pays for
it). Drawing and saving run inside :func:`matplotlib.rc_context` with the settings below, which
fix the SVG id salt and leave out dates and version strings, so the bytes depend only on the
data and the matplotlib version. SVG text stays text (``svg.fonttype = "none"``), so labels can
be searched and read by screen readers.

Colours are our own, taken from the sheets' palette: ink, slate teal and rust are dark, ochre
is mid-grey in greyscale and the blue-grey of the bands pale; every series also differs from
the others in its figure by marker, fill, line style or hatching, so the figures read in
greyscale and on a monochrome printer.
Figures are 6.6 in wide (168 mm) to print at their natural size inside the A4 printable width,
with text from 9 to 11 pt.
"""

from planner.report.plots._style import figure_png, figure_svg
from planner.report.plots.plan import (
    PLAN_PLOTS,
    available_plan_plots,
    bound_fraction_figure,
    coverage_figure,
    ladder_figure,
    plan_plots,
)
from planner.report.plots.simulation import (
    epsilon_histogram_png,
    histogram_figure,
    k_histogram_png,
    simulation_plots,
    technique_histogram_figure,
    technique_plots,
)

__all__ = [
    "PLAN_PLOTS",
    "available_plan_plots",
    "bound_fraction_figure",
    "coverage_figure",
    "epsilon_histogram_png",
    "figure_png",
    "figure_svg",
    "histogram_figure",
    "k_histogram_png",
    "ladder_figure",
    "plan_plots",
    "simulation_plots",
    "technique_histogram_figure",
    "technique_plots",
]
