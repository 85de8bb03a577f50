"""The plan result document, ``planner.plan/2``: one model, written by the report, read by verify.

DESIGN.md section 5 ("Contract 2"). :func:`planner.report.plan_json.plan_document` builds a
:class:`PlanDocument` from a finished plan and dumps it; :func:`planner.resultfile.parse_result`
validates a saved document against the same model and turns it back into stage results. So
what the planner writes is by construction what ``planner verify`` reads.

Each entry model mirrors one stage-result dataclass of :mod:`planner.result`, key for key:
:meth:`Entry.of` reads the entry's keys from the dataclass and :meth:`Entry.to_record` builds
the dataclass back, so a key added to both (with its ``description``, which error messages
quote as the fix) needs no other code. The models are strict (JSON is typed: ``"2.6"`` for a
volume or ``true`` for an order is a mistake, not a value to coerce; integers are still
accepted where a number is expected), forbid unknown keys and refuse NaN and infinity.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any, ClassVar, Literal, Self, TypeVar, get_args

from pydantic import BaseModel, ConfigDict, Field

from planner.result import (
    Addition,
    BiasCauses,
    Check,
    Delivery,
    GlobalFitPrediction,
    Mixture,
    Prediction,
    Role,
    Status,
    StockPreparation,
    Totals,
)

__all__ = [
    "SCHEMA",
    "AdditionEntry",
    "BiasCausesEntry",
    "CheckEntry",
    "DeliveryEntry",
    "Entry",
    "GlobalFitEntry",
    "MixtureEntry",
    "PlanDocument",
    "PredictionEntry",
    "PreparationEntry",
    "TotalsEntry",
]

#: The schema name and version of the document.
SCHEMA = "planner.plan/2"

_Record = TypeVar("_Record")


class _Model(BaseModel):
    """Strict types, no unknown keys, immutable, finite numbers."""

    model_config = ConfigDict(strict=True, extra="forbid", frozen=True, allow_inf_nan=False)


class Entry(_Model):
    """An object of the document that mirrors a stage-result dataclass key for key."""

    #: The dataclass of :mod:`planner.result` this entry mirrors.
    record: ClassVar[type[Any]]

    @classmethod
    def of(cls, record: object) -> Self:
        """The entry of a stage result: its keys read from ``record``'s attributes."""
        return cls.model_validate(
            {
                key: _entry_value(info.annotation, getattr(record, key))
                for key, info in cls.model_fields.items()
            }
        )

    def to_record(self, kind: type[_Record]) -> _Record:
        """The stage result of class ``kind`` (this entry's :attr:`record`) with these values."""
        return kind(**{key: _record_value(getattr(self, key)) for key in type(self).model_fields})


def _entry_class(annotation: object) -> type[Entry] | None:
    if isinstance(annotation, type) and issubclass(annotation, Entry):
        return annotation
    return next(filter(None, map(_entry_class, get_args(annotation))), None)


def _entry_value(annotation: object, value: object) -> object:
    """A stage result's value as the entry holds it: lists for tuples, plain dicts, entries."""
    if isinstance(value, Mapping):
        return dict(value)
    entry = _entry_class(annotation)
    if isinstance(value, Sequence) and not isinstance(value, str):
        return [item if entry is None else entry.of(item) for item in value]
    if entry is not None and value is not None:
        return entry.of(value)
    return value


def _record_value(value: object) -> object:
    """An entry's value as the stage result holds it: tuples for lists, dataclasses."""
    if isinstance(value, Entry):
        return value.to_record(value.record)
    if isinstance(value, list):
        return tuple(_record_value(item) for item in value)
    return value


class DeliveryEntry(Entry):
    """One delivery of one device (:class:`planner.result.Delivery`)."""

    record = Delivery
    device: str = Field(description='the device id, e.g. "piston-pipette-100-1000uL"')
    volume_mL: float = Field(gt=0, description="the volume of this delivery [mL], a number > 0")


class AdditionEntry(Entry):
    """One delivery of a stock into a mixture (:class:`planner.result.Addition`)."""

    record = Addition
    stock: str = Field(description="the id of a stock in inputs.stocks, in double quotes")
    # Bounds only where a value feeds the verifier's re-mixing: a negative volume would make
    # negative concentrations, which no mass-action solution has.
    volume_mL: float = Field(ge=0, description="the volume delivered [mL], a number >= 0")
    devices: list[str] = Field(
        description='the list of device ids, one per delivery, e.g. ["buret-25mL"]'
    )
    order: int = Field(description="the position in the order of addition, a whole number from 1")
    # Plans saved before deliveries were listed name the devices only.
    deliveries: list[DeliveryEntry] = Field(
        default_factory=list,
        description='the list of deliveries in order, each { "device": id, "volume_mL": v }',
    )


class MixtureEntry(Entry):
    """One mixture with its recipe and predicted state (:class:`planner.result.Mixture`)."""

    record = Mixture
    id: str = Field(description='the mixture id, e.g. "S1", in double quotes')
    role: Role = Field(description='one of "blank", "standard", "test"')
    total_volume_mL: float = Field(
        gt=0, description="the final volume of the mixture [mL], a number > 0"
    )
    additions: list[AdditionEntry] = Field(
        description="the list of additions, each { stock, volume_mL, devices, order }"
    )
    initial_M: dict[str, float] = Field(
        description="an object of ion concentrations after mixing [mol/L], numbers"
    )
    equilibrium_M: dict[str, float] = Field(
        description="an object of concentrations at equilibrium [mol/L], numbers"
    )
    absorbance: float = Field(description="the predicted reading [absorbance units], a number")
    u_absorbance: float = Field(description="the standard uncertainty of the reading, a number")
    bound_fraction: float = Field(
        description="the fraction of the limiting reagent in products, a number"
    )
    ionic_strength_M: float = Field(description="the ionic strength [mol/L], a number")


_VOLUMES = "an object of stock volumes [mL]"


class TotalsEntry(Entry):
    """The stock totals (:class:`planner.result.Totals`); dead volume optional when read."""

    record = Totals
    per_bench: dict[str, float] = Field(description=f"{_VOLUMES} per bench")
    per_section: dict[str, float] = Field(description=f"{_VOLUMES} per section")
    session: dict[str, float] = Field(description=f"{_VOLUMES} per session")
    to_prepare: dict[str, float] = Field(description=f"{_VOLUMES} the prep room makes")
    dead_volume_mL: float | None = Field(
        None, description="the dead volume per stock and bench container [mL], a number"
    )
    for_stocks: dict[str, float] = Field(
        default_factory=dict,
        description=f"{_VOLUMES} used to make up the other stocks (medium and aliquots)",
    )


class CheckEntry(Entry):
    """One check and its finding (:class:`planner.result.Check`)."""

    record = Check
    name: str = Field(description='the check name, e.g. "absorbance-window"')
    status: Status = Field(description='"pass", "warn" or "fail"')
    detail: str = Field(description="what was found, in double quotes")


class PreparationEntry(Entry):
    """How the prep room makes one stock (:class:`planner.result.StockPreparation`)."""

    record = StockPreparation
    stock: str = Field(description="the id of a stock in inputs.stocks, in double quotes")
    flask_mL: float = Field(description="the volumetric flask to make it in [mL], a number")
    flasks: int = Field(description="how many such flasks, a whole number")
    solid_formula: str = Field(description='the solid to weigh, e.g. "KSCN", or ""')
    molar_mass_g_per_mol: float = Field(description="the solid's molar mass [g/mol], a number")
    purity: float = Field(description="the mass fraction of the compound in the solid, a number")
    mass_g: float = Field(description="the mass of solid per flask [g], a number")
    provides: str = Field(description='the ion the solid provides, e.g. "SCN-", or ""')
    concentration_M: float = Field(description="that ion's concentration [mol/L], a number")
    medium: str = Field(description="what the stock is made up in, for the label")
    source: str = Field(
        "", description='the stock it is diluted from, in double quotes, or "" (not a dilution)'
    )
    aliquot_mL: float = Field(
        0.0, description="the volume of that stock per flask [mL], a number (0: no dilution)"
    )
    salt_formula: str = Field(
        "", description='the inert salt of design.ionic_medium to add, e.g. "NaNO3", or ""'
    )
    salt_M: float = Field(0.0, description="its concentration in the stock [mol/L], a number")
    salt_mass_g: float = Field(0.0, description="its mass per flask [g], a number")


_U = "its standard uncertainty, a number"


class _FitEntry(Entry):
    """The keys both analyses' predictions share; each adds its own ``K``."""

    epsilon: float = Field(description="the molar absorptivity [L mol-1 cm-1], a number")
    u_epsilon: float = Field(description=_U)
    u_K: float = Field(description=_U)


class BiasCausesEntry(Entry):
    """The all-bound K's relative bias split by cause (:class:`planner.result.BiasCauses`);
    every value K / K_true - 1 of that cause alone, a number."""

    record = BiasCauses
    all_bound_assumption: float | None = Field(
        description="the standards' limiting reagent taken as fully bound, a number or null"
    )
    absorbing_reagents: float | None = Field(
        description="added by the other absorbers (other products, free reagents), a number or null"
    )
    stray_light: float | None = Field(
        description="added by the photometer's stray light, a number or null"
    )
    ionic_medium: float | None = Field(
        description="each mixture's own ionic medium, not in K (said apart), a number or null"
    )
    temperature: float | None = Field(
        description="the constant at the benches' temperature against the plan's, a number or null"
    )

    @classmethod
    def of(cls, record: object) -> Self:
        """The entry of :class:`planner.result.BiasCauses`; a share no analysis could give
        (NaN) is written as null, JSON having no NaN."""
        return cls.model_validate(
            {
                key: None if math.isnan(value := float(getattr(record, key))) else value
                for key in cls.model_fields
            }
        )

    def to_record(self, kind: type[_Record]) -> _Record:
        """The :class:`planner.result.BiasCauses` of these values, null read back as NaN."""
        return kind(
            **{
                key: math.nan if getattr(self, key) is None else getattr(self, key)
                for key in type(self).model_fields
            }
        )


class PredictionEntry(_FitEntry):
    """What the all-bound analysis is expected to report (:class:`planner.result.Prediction`;
    its per-test uncertainties and intercept are not written)."""

    record = Prediction
    K: float = Field(description="the mean K over the tests [L/mol], a number")
    K_bias_from_assumption: float = Field(description="K / K_true - 1, a number")
    K_true: float = Field(description="the K the plan assumes [L/mol], a number")
    epsilon_true: float = Field(description="the absorptivity the plan assumes, a number")
    K_per_test: list[float] = Field(description="the K of each test mixture, a list of numbers")
    K_bias_causes: BiasCausesEntry | None = Field(
        None,
        description="K_bias_from_assumption split by cause, an object or null "
        "{all_bound_assumption, absorbing_reagents, stray_light, ionic_medium, temperature}",
    )


class GlobalFitEntry(_FitEntry):
    """What the global fit is expected to report (:class:`planner.result.GlobalFitPrediction`)."""

    record = GlobalFitPrediction
    K: float = Field(description="the measured species' K, a number")


class PlanDocument(_Model):
    """The whole document. Consumers may add top-level blocks of their own, so unknown keys
    are allowed here; only the contract's nested objects are closed. ``title`` and ``notes``
    are for people and are not read back."""

    model_config = ConfigDict(strict=True, extra="allow", frozen=True, allow_inf_nan=False)

    schema_name: str = Field(alias="schema", description=f'the schema, "{SCHEMA}"')
    title: str = Field("", description="the plan's title, in double quotes")
    inputs: dict[str, Any] = Field(description="the validated plan, as an object")
    # A plan the shelf cannot make has no mixtures: it is still written, with the failed
    # checks that say why (verify then fails its mixture-count check too).
    mixtures: list[MixtureEntry] = Field(description="the list of mixtures, each an object")
    totals_mL: TotalsEntry = Field(
        description="an object { per_bench, per_section, session, to_prepare, dead_volume_mL }"
    )
    checks: list[CheckEntry] = Field(
        default_factory=list, description="the list of checks, each { name, status, detail }"
    )
    preparation: list[PreparationEntry] | None = Field(
        None, description="the list of stocks to prepare, each an object"
    )
    prediction: PredictionEntry | None = Field(
        None, description="the prediction of the all-bound analysis, an object or null"
    )
    analysis: Literal["all-bound", "global-fit"] = Field(
        "all-bound",
        description='the analysis the plan is designed for, "all-bound" or "global-fit"',
    )
    global_fit_prediction: GlobalFitEntry | None = Field(
        None, description="the prediction of the global fit, an object or null"
    )
    notes: list[str] = Field(
        default_factory=list, description="notes for people, a list of strings"
    )
