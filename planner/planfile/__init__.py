"""Plan files: TOML text (or a saved mapping) to validated, unit-normalised plan inputs.

This is the boundary layer of the planner (DESIGN.md section 4, "Contract 1"). A plan file is
read in two steps:

1. *Structure* (:mod:`~planner.planfile.schema`): frozen pydantic models that forbid unknown
   keys check that every key is known, every value has the right type and every single number
   lies in its range.
2. *Meaning* (:mod:`~planner.planfile.checks`): plain Python checks that need more than one
   key (a species formula names declared components, the limiting reagent is in a stock, the
   total volume fits the vessel, ...), fill every default and convert ``K`` to ``log_beta``.

:mod:`~planner.planfile.reader` runs them on a file, a text or a mapping, and
:mod:`~planner.planfile.writer` writes validated inputs back in plan-file keys.

The result is a :class:`planner.inputs.PlanInputs` of plain frozen dataclasses; pydantic never
leaves the boundary. Every failure raises :class:`planner.errors.PlanFileError` whose message
names the key path (``stocks[1].contains_M.Fe3+``, 0-based list indices), the value received
and what would be valid, worded by :mod:`planner.fileio` as the saved-result reader's are.

Units are in the key names and are already the core's units (mol/L, mL, cm, nm, °C), except
``range_uL`` and ``step_uL`` of piston pipettes, which stay in µL as :class:`Device` keeps
them; the piston pipette's ``volume_mL`` is filled from the top of its range.
"""

from __future__ import annotations

from planner.fileio.text import MAX_PLAN_FILE_BYTES, MAX_RESULT_FILE_BYTES
from planner.planfile.reader import load_plan, parse_plan, plan_from_mapping
from planner.planfile.writer import plan_to_mapping

__all__ = [
    "MAX_PLAN_FILE_BYTES",
    "MAX_RESULT_FILE_BYTES",
    "load_plan",
    "parse_plan",
    "plan_from_mapping",
    "plan_to_mapping",
]
