"""Validated plan inputs back to plan-file keys, for the ``inputs`` block of plan.json."""

from __future__ import annotations

from typing import Any

from planner.inputs import Bench, Device, PlanInputs, Stock
from planner.lab.bench import bench_values
from planner.planfile.schema import CLASSLESS_KINDS, DELIVERING_KINDS, GRADUATED_KINDS

__all__ = ["plan_to_mapping"]


def plan_to_mapping(inputs: PlanInputs) -> dict[str, Any]:
    """The validated plan as plain JSON-able data in plan-file keys.

    Every default is written out, ``K`` appears as ``log_beta``, a flask's total volume is
    given, and a key that does not apply to a device (``class`` of a piston pipette or tube,
    ``range_uL`` of anything else) is left out. Optional values that are unset are ``None``.

    Parameters
    ----------
    inputs
        A plan built by this module.

    Returns
    -------
    dict
        Nested dicts, lists, strings, numbers, booleans and ``None``, such that
        ``plan_from_mapping(plan_to_mapping(inputs)) == inputs``.
    """
    reaction = inputs.reaction
    instrument = inputs.instrument
    design = inputs.design
    session = inputs.session
    return {
        "title": inputs.title,
        "reaction": {
            "temperature_C": reaction.temperature_C,
            "ionic_strength_M": reaction.ionic_strength_M,
            "components": list(reaction.components),
            "species": [
                {
                    "name": sp.name,
                    "formula": dict(sp.formula),
                    "log_beta": sp.log_beta,
                    # The plan file's value: the inputs move it to the constant medium.
                    "epsilon": sp.epsilon if sp.plan_epsilon is None else sp.plan_epsilon,
                    "log_beta_sd": sp.log_beta_sd,
                    **_unless_none("enthalpy_kJ_mol", sp.enthalpy_kJ_mol),
                    **(
                        {"epsilon_ionic_slope": sp.epsilon_ionic_slope}
                        if sp.epsilon_ionic_slope
                        else {}
                    ),
                }
                for sp in reaction.species
            ],
            "component_epsilon": dict(reaction.component_epsilon),
            "sit_delta_epsilon_kg_mol": reaction.sit_delta_epsilon_kg_mol,
        },
        "instrument": {
            "wavelength_nm": instrument.wavelength_nm,
            "path_length_cm": instrument.path_length_cm,
            "absorbance_window": list(instrument.absorbance_window),
            "absorbance_sd": instrument.absorbance_sd,
            "stray_light": instrument.stray_light,
            "cuvette_fill_mL": instrument.cuvette_fill_mL,
            "absorbance_rsd": instrument.absorbance_rsd,
            "transmittance_sd": instrument.transmittance_sd,
        },
        "stocks": [_stock_mapping(stock) for stock in inputs.stocks],
        "glassware": [_device_mapping(device) for device in inputs.glassware],
        "design": {
            "standards": design.standards,
            "tests": design.tests,
            "limiting": design.limiting,
            "assumption_tolerance": design.assumption_tolerance,
            "vessel": design.vessel,
            "total_volume_mL": design.total_volume_mL,
            "bound_fraction_span": design.bound_fraction_span,
            "bound_fraction_range": list(design.bound_fraction_range),
            "ionic_strength_spread": design.ionic_strength_spread,
            "blanks": design.blanks,
            "analysis": design.analysis,
            "K_bias_tolerance": design.K_bias_tolerance,
            "criterion": design.criterion,
            **_unless_none(
                "ionic_medium",
                None
                if design.ionic_medium is None
                else {
                    "salt": design.ionic_medium.salt,
                    "ionic_strength_M": design.ionic_medium.ionic_strength_M,
                },
            ),
            **_unless_none("measured_species", design.measured_species),
        },
        "session": {
            "sections": session.sections,
            "benches_per_section": session.benches_per_section,
            "replicates": session.replicates,
            "margin": session.margin,
            "dead_volume_mL": session.dead_volume_mL,
            **_unless_none("temperature_C", session.temperature_C),
        },
        **_bench_mapping(inputs.bench),
    }


def _unless_none(key: str, value: Any) -> dict[str, Any]:
    """``{key: value}``, or nothing for an unset (``None``) value: a key left out."""
    return {} if value is None else {key: value}


def _bench_mapping(bench: Bench) -> dict[str, Any]:
    """The ``[bench]`` table with every term written out; none for an ideal bench."""
    if bench.technique == "none":
        return {}
    return {
        "bench": {
            "technique": bench.technique,
            **bench_values(bench),
        }
    }


def _stock_mapping(stock: Stock) -> dict[str, Any]:
    solid = None
    if stock.solid is not None:
        solid = {
            "formula": stock.solid.formula,
            "purity": stock.solid.purity,
            "provides": stock.solid.provides,
        }
    return {
        "id": stock.id,
        "contains_M": dict(
            stock.plan_contains_M if stock.plan_contains_M is not None else stock.contains_M
        ),
        "relative_uncertainty": stock.relative_uncertainty,
        "available_mL": stock.available_mL,
        "solid": solid,
        "diluent": stock.diluent,
    }


def _device_mapping(device: Device) -> dict[str, Any]:
    entry: dict[str, Any] = {"kind": device.kind, "volume_mL": device.volume_mL}
    if device.kind not in CLASSLESS_KINDS:
        entry["class"] = device.device_class
    entry["count"] = device.count
    if device.kind == "piston-pipette":
        entry["range_uL"] = None if device.range_uL is None else list(device.range_uL)
        entry["step_uL"] = device.step_uL
    if device.kind in GRADUATED_KINDS:
        entry["division_mL"] = device.division_mL
    if device.kind in DELIVERING_KINDS:
        entry["min_delivery_mL"] = device.min_delivery_mL
    entry["tolerance_mL"] = device.tolerance_mL
    return entry
