"""Saved plan results: ``plan.json`` text back to the stage results, for re-verification.

This is the boundary layer of ``planner verify`` (DESIGN.md section 5, "Contract 2"): it reads
a plan result, perhaps edited by hand, and rebuilds what :func:`planner.verify.verify_result`
needs. It checks structure only (every key known, every value of the right type and finite);
whether the recipes make sense is the verifier's job, so a hand-edited plan with wrong volumes
reads without error and then fails its checks.

Rules of the reader (:mod:`~planner.resultfile.reader`):

- the document is a JSON object whose ``schema`` is ``"planner.plan/2"``, and its structure is
  the model :class:`~planner.resultfile.schema.PlanDocument`, the one the report writes;
- ``inputs`` is validated exactly as a plan file is, by
  :func:`planner.planfile.plan_from_mapping`;
- a mixture, an addition, ``totals_mL`` and a check may hold only the keys of the contract, so
  a misspelt key in a hand edit is caught rather than ignored; unknown *top-level* keys are
  allowed, because consumers may add blocks of their own;
- ``preparation`` (a list of stocks to prepare) and ``prediction`` (an object, or null) hold
  only the keys the planner writes, each of them; both may be left out, and verification
  then says so. ``title`` (text) and ``notes`` (a list of text) are not read and may be left
  out, as may ``checks``; ``totals_mL.dead_volume_mL`` defaults to the plan's
  ``session.dead_volume_mL``;
- NaN and infinity (which strict JSON does not have, and the planner never writes) are
  errors wherever they appear, as are repeated keys in one object;
- outside ``inputs`` (which the plan-file rules bound), a number larger in size than
  :data:`LARGEST_NUMBER` is an error: no quantity of a plan comes near it, and arithmetic on
  such numbers (a volume of 1e308 mL in picolitres, say) overflows.

Every failure raises :class:`planner.errors.ResultFileError` whose message names the dotted
key path (``mixtures[3].additions[1].volume_mL``, 0-based list indices), the value received
and what would be valid, worded by :mod:`planner.fileio` as the plan-file reader's are.
Units are those of the document: mol/L and mL.
"""

from __future__ import annotations

from planner.resultfile.reader import LARGEST_NUMBER, SavedPlan, load_result, parse_result
from planner.resultfile.schema import SCHEMA

__all__ = ["LARGEST_NUMBER", "SCHEMA", "SavedPlan", "load_result", "parse_result"]
