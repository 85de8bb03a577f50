"""Figures of a plan, of its virtual class and of the class's readings, as SVG bytes.

The package holds one module per job: :mod:`._style` (palette, face, number formats),
:mod:`._svg` (the chart kit: marks, ticks, layout, SVG text), :mod:`.plan` (the plan figures),
:mod:`.simulation` (the virtual class's figures) and :mod:`.readings` (the class's readings);
the figures draw numbers the core computed (the bound-fraction sweep comes from
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
analysis, :func:`technique_histogram_figure` for K by bench preset.

Every figure is a :class:`~planner.report.plots._svg.Chart`: its marks keep the numbers they
plot, by series name (``gid``), and :meth:`~planner.report.plots._svg.Chart.svg` writes it
as SVG 1.1 with no plotting library (a figure takes milliseconds). The bytes depend on the
data alone: no date, no version string, ids derived from the figure's name. Text stays text,
so labels can be searched and read by screen readers, and print crisply; the HTML sheets
show the SVG files, the Markdown answer key links them, and Chromium keeps them as vectors
in the PDF.

Colours are our own, taken from the sheets' palette: ink, slate teal and rust are dark, ochre
is mid-grey in greyscale and the blue-grey of the bands pale; every series also differs from
the others in its figure by marker, fill, line style or hatching, so the figures read in
greyscale and on a monochrome printer.
Figures are 6.6 in wide (168 mm) to print at their natural size inside the A4 printable width,
with text from 9 to 11 pt.
"""

from planner.report.plots._svg import Chart
from planner.report.plots.plan import (
    PLAN_PLOTS,
    available_plan_plots,
    bound_fraction_figure,
    coverage_figure,
    ladder_figure,
    plan_plots,
)
from planner.report.plots.simulation import (
    histogram_figure,
    simulation_plots,
    technique_histogram_figure,
    technique_plots,
)

__all__ = [
    "PLAN_PLOTS",
    "Chart",
    "available_plan_plots",
    "bound_fraction_figure",
    "coverage_figure",
    "histogram_figure",
    "ladder_figure",
    "plan_plots",
    "simulation_plots",
    "technique_histogram_figure",
    "technique_plots",
]
