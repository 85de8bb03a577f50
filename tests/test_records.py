"""@record against the standard library's @dataclass(frozen=True, slots=True), the reference it
must behave as: the same class declared both ways gives the same equality, hash, repr,
immutability, slots, fields, replace, asdict, pattern matching and pickling."""

from __future__ import annotations

import copy
import dataclasses
import pickle
from dataclasses import dataclass, field

import numpy as np
import pytest

from planner.records import record


@record
class Point:
    """A record with a default, a factory, and a field left out of comparison and repr."""

    x: float
    y: float = 0.0
    tags: tuple[str, ...] = field(default_factory=tuple)
    note: str = field(default="", compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class ReferencePoint:
    """The same declaration, made by the standard library."""

    x: float
    y: float = 0.0
    tags: tuple[str, ...] = field(default_factory=tuple)
    note: str = field(default="", compare=False, repr=False)


@record
class Single:
    """One field: its key is still a tuple."""

    value: float


@record
class Nothing:
    """No fields at all."""


@record
class Derived:
    """A field derived in __post_init__, as the validated inputs derive theirs."""

    value: float
    doubled: float = field(init=False, compare=False, repr=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "doubled", 2 * self.value)


@record
class Holder:
    """Holds an array, as the stage results do."""

    values: np.ndarray


def _pairs() -> list[tuple[tuple[object, ...], dict[str, object]]]:
    return [
        ((1.0,), {}),
        ((1.0, 2.0), {}),
        ((1.0, 2.0, ("a", "b")), {}),
        ((1.0,), {"note": "other"}),
        ((float("nan"),), {}),
        ((-0.0,), {}),
    ]


@pytest.mark.parametrize("first", range(6))
@pytest.mark.parametrize("second", range(6))
def test_equality_and_hash_as_the_standard_library(first, second):
    (args_a, kw_a), (args_b, kw_b) = _pairs()[first], _pairs()[second]
    ours = Point(*args_a, **kw_a) == Point(*args_b, **kw_b)
    reference = ReferencePoint(*args_a, **kw_a) == ReferencePoint(*args_b, **kw_b)
    assert ours == reference
    if ours:
        assert hash(Point(*args_a, **kw_a)) == hash(Point(*args_b, **kw_b))


def test_repr_as_the_standard_library():
    ours = repr(Point(1.5, tags=("a",), note="hidden"))
    reference = repr(ReferencePoint(1.5, tags=("a",), note="hidden"))
    assert ours == reference.replace("ReferencePoint", "Point")
    assert repr(Single(2.0)) == "Single(value=2.0)"
    assert repr(Nothing()) == "Nothing()"


def test_other_classes_and_other_types_are_not_equal():
    assert Point(1.0) != ReferencePoint(1.0)
    assert Point(1.0) != (1.0, 0.0, (), "")
    assert Single(1.0) != 1.0
    assert Nothing() == Nothing()
    assert hash(Nothing()) == hash(Nothing())
    assert Single(1.0) == Single(1.0)
    assert hash(Single(1.0)) == hash(Single(1.0))


def test_frozen_slotted_and_a_dataclass():
    point = Point(1.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        point.x = 2.0  # type: ignore[misc]
    with pytest.raises(dataclasses.FrozenInstanceError):
        del point.y  # type: ignore[misc]
    assert not hasattr(point, "__dict__")
    assert dataclasses.is_dataclass(point)
    assert [f.name for f in dataclasses.fields(point)] == ["x", "y", "tags", "note"]
    assert Point.__match_args__ == ReferencePoint.__match_args__
    moved = dataclasses.replace(point, y=3.0)
    assert moved == Point(1.0, 3.0)
    assert dataclasses.asdict(moved) == {"x": 1.0, "y": 3.0, "tags": (), "note": ""}
    match moved:
        case Point(x, y):
            assert (x, y) == (1.0, 3.0)
    assert pickle.loads(pickle.dumps(moved)) == moved
    assert copy.deepcopy(moved) == moved
    assert copy.copy(moved) == moved
    with pytest.raises(dataclasses.FrozenInstanceError):
        pickle.loads(pickle.dumps(moved)).x = 5.0  # type: ignore[misc]


def test_a_field_derived_after_init_is_set_once_and_then_frozen():
    derived = Derived(1.5)
    assert derived.doubled == 3.0
    assert dataclasses.replace(derived, value=2.0).doubled == 4.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        derived.doubled = 0.0  # type: ignore[misc]
    with pytest.raises(dataclasses.FrozenInstanceError):
        derived.value = 0.0  # type: ignore[misc]
    assert pickle.loads(pickle.dumps(derived)).doubled == 3.0


def test_a_record_holding_an_array_compares_as_the_standard_library_does():
    # A tuple comparison of arrays is ambiguous: the standard library's generated __eq__
    # raises on arrays of more than one element, and so does ours.
    same = np.array([1.0, 2.0])
    assert Holder(same) == Holder(same)  # identical objects compare equal, as in tuples
    with pytest.raises(ValueError, match="ambiguous"):
        _ = Holder(np.array([1.0, 2.0])) == Holder(np.array([1.0, 2.0]))
