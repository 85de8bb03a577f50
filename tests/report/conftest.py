"""A small finished plan built by hand, for the report tests (and anyone else's).

Everything here is invented for this project: an iron(III)/thiocyanate-like system in tubes
with a blank, two standards and two tests. The numbers are plausible but were typed in, not
computed, so the report tests check layout and bookkeeping, not chemistry. The volume
4.123456789012 mL of S1 is there to show that the JSON keeps every digit.
"""

from __future__ import annotations

import pytest

from planner.inputs import (
    DesignSettings,
    Device,
    Instrument,
    PlanInputs,
    ProductSpecies,
    Reaction,
    SessionSettings,
    Solid,
    Stock,
)
from planner.result import (
    Addition,
    Check,
    Mixture,
    Plan,
    Prediction,
    StockPreparation,
    Totals,
)

#: A volume with more digits than any sheet shows [mL].
PRECISE_VOLUME_mL = 4.123456789012


def make_inputs(
    *,
    stocks: tuple[Stock, ...] | None = None,
    sections: int = 2,
    benches_per_section: int = 3,
    title: str = "Invented demo plan: iron(III) and thiocyanate in tubes",
) -> PlanInputs:
    """Invented plan inputs; ``stocks`` replaces the default three stocks."""
    if stocks is None:
        stocks = (
            Stock(
                id="iron",
                contains_M={"Fe3+": 0.2, "H+": 0.5},
                relative_uncertainty=0.002,
                available_mL=400.0,
                solid=Solid(formula="Fe(NO3)3(H2O)9", purity=0.98),
            ),
            Stock(
                id="thiocyanate",
                contains_M={"SCN-": 0.002, "H+": 0.5},
                relative_uncertainty=0.003,
                available_mL=100.0,
                solid=Solid(formula="KSCN", purity=0.99),
            ),
            Stock(id="diluent", contains_M={"H+": 0.5}, diluent=True),
        )
    return PlanInputs(
        title=title,
        reaction=Reaction(
            temperature_C=25.0,
            ionic_strength_M=0.5,
            components=("Fe3+", "SCN-"),
            species=(
                ProductSpecies(
                    name="FeSCN2+", formula={"Fe3+": 1, "SCN-": 1}, log_beta=2.0, epsilon=4600.0
                ),
                ProductSpecies(
                    name="Fe(SCN)2+", formula={"Fe3+": 1, "SCN-": 2}, log_beta=2.8, epsilon=0.0
                ),
            ),
        ),
        instrument=Instrument(
            wavelength_nm=450.0,
            path_length_cm=1.0,
            absorbance_window=(0.1, 0.9),
            absorbance_sd=0.003,
            stray_light=0.001,
            cuvette_fill_mL=3.0,
        ),
        stocks=stocks,
        glassware=(
            Device(kind="transfer-pipette", volume_mL=2.0, count=2),
            Device(kind="transfer-pipette", volume_mL=5.0),
            Device(kind="buret", volume_mL=25.0),
            Device(kind="graduated-pipette", volume_mL=10.0, division_mL=0.1),
            Device(kind="tube", volume_mL=15.0, count=10),
        ),
        design=DesignSettings(
            standards=2,
            tests=2,
            limiting="SCN-",
            assumption_tolerance=0.02,
            vessel="tube",
            total_volume_mL=10.0,
        ),
        session=SessionSettings(
            sections=sections,
            benches_per_section=benches_per_section,
            replicates=1,
            margin=0.15,
            dead_volume_mL=5.0,
        ),
    )


def _mixture(
    mixture_id: str,
    role: str,
    diluent_mL: float,
    iron_mL: float,
    thiocyanate_mL: float,
    *,
    iron_devices: tuple[str, ...],
    thiocyanate_devices: tuple[str, ...],
    product_M: float,
    absorbance: float,
    bound_fraction: float,
) -> Mixture:
    additions = []
    order = 1
    for stock, volume_mL, devices in (
        ("diluent", diluent_mL, ("buret-25mL",)),
        ("iron", iron_mL, iron_devices),
        ("thiocyanate", thiocyanate_mL, thiocyanate_devices),
    ):
        if volume_mL > 0:
            additions.append(Addition(stock, volume_mL, devices, order))
            order += 1
    return Mixture(
        id=mixture_id,
        role=role,
        total_volume_mL=10.0,
        additions=tuple(additions),
        initial_M={"Fe3+": 0.02 * iron_mL, "SCN-": 2e-4 * thiocyanate_mL, "H+": 0.5, "X-": 0.56},
        equilibrium_M={
            "Fe3+": 0.02 * iron_mL - product_M,
            "SCN-": max(2e-4 * thiocyanate_mL - product_M, 0.0),
            "FeSCN2+": product_M,
            "Fe(SCN)2+": product_M * 1e-3,
        },
        absorbance=absorbance,
        u_absorbance=0.0031,
        bound_fraction=bound_fraction,
        ionic_strength_M=0.56,
    )


def make_plan(inputs: PlanInputs | None = None) -> Plan:
    """The invented finished plan (see the module docstring)."""
    if inputs is None:
        inputs = make_inputs()
    mixtures = (
        _mixture(
            "B1",
            "blank",
            5.0,
            5.0,
            0.0,
            iron_devices=("transfer-pipette-5mL",),
            thiocyanate_devices=(),
            product_M=0.0,
            absorbance=0.012,
            bound_fraction=0.0,
        ),
        _mixture(
            "S1",
            "standard",
            10.0 - 5.0 - PRECISE_VOLUME_mL,
            5.0,
            PRECISE_VOLUME_mL,
            iron_devices=("transfer-pipette-5mL",),
            thiocyanate_devices=("graduated-pipette-10mL",),
            product_M=7.5e-5,
            absorbance=0.357,
            bound_fraction=0.909,
        ),
        _mixture(
            "S2",
            "standard",
            1.0,
            5.0,
            4.0,
            iron_devices=("transfer-pipette-5mL",),
            thiocyanate_devices=("transfer-pipette-2mL", "transfer-pipette-2mL"),
            product_M=7.27e-5,
            absorbance=0.346,
            bound_fraction=0.909,
        ),
        _mixture(
            "T1",
            "test",
            6.0,
            2.0,
            2.0,
            iron_devices=("transfer-pipette-2mL",),
            thiocyanate_devices=("transfer-pipette-2mL",),
            product_M=1.8e-5,
            absorbance=0.095,
            bound_fraction=0.45,
        ),
        _mixture(
            "T2",
            "test",
            4.0,
            2.0,
            4.0,
            iron_devices=("transfer-pipette-2mL",),
            thiocyanate_devices=("transfer-pipette-2mL", "transfer-pipette-2mL"),
            product_M=3.4e-5,
            absorbance=0.168,
            bound_fraction=0.425,
        ),
    )
    per_bench = {"iron": 19.0, "thiocyanate": 14.123456789012, "diluent": 16.876543210988}
    sets = inputs.session.sets
    benches = inputs.session.sections * inputs.session.benches_per_section
    per_section = {k: v * inputs.session.benches_per_section for k, v in per_bench.items()}
    session = {k: v * sets for k, v in per_bench.items()}
    to_prepare = {k: v * 1.15 + 5.0 * benches for k, v in session.items()}
    return Plan(
        inputs=inputs,
        mixtures=mixtures,
        totals=Totals(
            per_bench=per_bench,
            per_section=per_section,
            session=session,
            to_prepare=to_prepare,
            dead_volume_mL=5.0,
        ),
        preparations=(
            StockPreparation(
                stock="iron",
                flask_mL=250.0,
                flasks=1,
                solid_formula="Fe(NO3)3(H2O)9",
                molar_mass_g_per_mol=403.99,
                purity=0.98,
                mass_g=20.611,
                provides="Fe3+",
                concentration_M=0.2,
                medium="0.5 mol/L HNO3",
            ),
            StockPreparation(
                stock="thiocyanate",
                flask_mL=250.0,
                flasks=1,
                solid_formula="KSCN",
                molar_mass_g_per_mol=97.18,
                purity=0.99,
                mass_g=0.049,
                provides="SCN-",
                concentration_M=0.002,
                medium="0.5 mol/L HNO3",
            ),
        ),
        checks=(
            Check("absorbance-window", "pass", "every standard and test reads inside 0.1-0.9"),
            Check(
                "limiting-reagent-assumption",
                "fail",
                "standards are only 90.9 % bound; raise the free iron(III) excess",
            ),
            Check("stock-inventory", "warn", "thiocyanate covers the need but not the margin"),
        ),
        prediction=Prediction(
            epsilon=4181.818181818182,
            u_epsilon=61.5,
            K=112.3456789,
            u_K=7.25,
            K_bias_from_assumption=0.1234567,
            K_true=100.0,
            epsilon_true=4600.0,
            K_per_test=(110.1, 114.6),
        ),
        notes=("Invented example for the report tests.",),
    )


@pytest.fixture
def plan() -> Plan:
    """The invented finished plan (iron(III)/thiocyanate-like, tubes, B1, S1-S2, T1-T2)."""
    return make_plan()
