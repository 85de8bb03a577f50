"""A class's readings, read back against the plan (``planner analyse``).

- :mod:`~planner.readings.table`: the readings CSV's text to accepted readings, listed
  rejections and empty cells (:func:`parse_readings`);
- :mod:`~planner.readings.files`: the boundary, finding each section's saved plan in a plan
  or variants folder (:func:`load_plans`) and reading the CSV (:func:`load_readings`);
- :mod:`~planner.readings.analyse`: pure functions from readings and saved plans to
  :class:`ClassAnalysis` (:func:`analyse_class`): each bench by both analyses of
  :mod:`planner.analysis`, compared with its section's answer key, flagged with the likely
  cause; the class's statistics and the pooled global fit.
"""

from __future__ import annotations

from planner.readings.analyse import (
    BenchResult,
    ClassAnalysis,
    ClassStatistic,
    Estimate,
    Flag,
    MixtureResult,
    Pooled,
    analyse_class,
)
from planner.readings.files import load_plans, load_readings, section_shapes
from planner.readings.table import (
    COLUMNS,
    Reading,
    ReadingsTable,
    Rejection,
    SectionShape,
    parse_readings,
)

__all__ = [
    "COLUMNS",
    "BenchResult",
    "ClassAnalysis",
    "ClassStatistic",
    "Estimate",
    "Flag",
    "MixtureResult",
    "Pooled",
    "Reading",
    "ReadingsTable",
    "Rejection",
    "SectionShape",
    "analyse_class",
    "load_plans",
    "load_readings",
    "parse_readings",
    "section_shapes",
]
