"""A class's readings, read back against the plan (``planner analyse``).

- :mod:`~planner.readings.table`: the readings CSV's text to accepted readings, listed
  rejections and empty cells (:func:`parse_readings`);
- :mod:`~planner.readings.files`: the boundary, finding each section's saved plan in a plan
  or variants folder (:func:`load_plans`) and reading the CSV (:func:`load_readings`);
- :mod:`~planner.readings.analyse`: pure functions from readings and saved plans to
  :class:`ClassAnalysis` (:func:`analyse_class`): each bench by both analyses of
  :mod:`planner.analysis`, compared with its section's answer key, flagged with the likely
  cause; the class's statistics and the pooled global fit.

Callers import each name from the submodule that defines it.
"""
