"""Records: the planner's frozen, slotted dataclasses, defined at a fraction of the cost.

``@record`` makes a class that behaves as one made by
``@dataclasses.dataclass(frozen=True, slots=True)``: the same fields and ``__init__``, slots,
``__match_args__``, equality, hash and repr, pickling and copying, and
``dataclasses.fields``, ``replace`` and ``asdict`` work on it; a field cannot be assigned or
deleted once the instance is made (:class:`dataclasses.FrozenInstanceError`). The dataclass
decorator writes each generated method as source text and compiles it, for every class; here
the decorator compiles only ``__init__``, and ``__setattr__``, ``__delattr__``, ``__eq__``,
``__hash__`` and ``__repr__`` are shared functions that read the class's field names. They
behave as the generated ones: a field is set once, by ``__init__`` (or by
``object.__setattr__`` in ``__post_init__``); instances are equal when of the same class with
equal compared fields and hash on the hashed fields; the repr is ``Name(field=value, ...)``
over the fields shown.

Why: a frozen, slotted dataclass costs about 4.1 million instructions to define on CPython
3.11 (a callgrind instruction count), almost all of it compiling those six methods, and
``planner plan`` defines some fifty records before it starts: they were the largest part of
the planner's own start-up. A record costs about a quarter of that (tests/test_records.py
checks the behaviour against the standard library's).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from operator import attrgetter
from typing import Any, TypeVar, dataclass_transform

__all__ = ["record"]

_T = TypeVar("_T")


def _getter(names: tuple[str, ...]) -> Callable[[Any], tuple[Any, ...]]:
    """A function that gives the tuple of these attributes of an object."""
    if len(names) >= 2:
        return attrgetter(*names)  # a tuple, built in C
    if names:
        (name,) = names
        return lambda obj: (getattr(obj, name),)
    return lambda obj: ()


def _setattr(self: Any, name: str, value: Any) -> None:
    # A field already set is frozen; one not yet set is being set by __init__ (or unpickled).
    if hasattr(self, name):
        raise dataclasses.FrozenInstanceError(f"cannot assign to field {name!r}")
    object.__setattr__(self, name, value)


def _delattr(self: Any, name: str) -> None:
    raise dataclasses.FrozenInstanceError(f"cannot delete field {name!r}")


def _eq(self: Any, other: object) -> Any:
    cls: Any = self.__class__
    key: Callable[[Any], tuple[Any, ...]] = cls.__record_compared__
    if other.__class__ is cls:
        return key(self) == key(other)
    return NotImplemented


def _hash(self: Any) -> int:
    cls: Any = self.__class__
    return hash(cls.__record_hashed__(self))


def _repr(self: Any) -> str:
    cls: Any = self.__class__
    shown = ", ".join(f"{name}={getattr(self, name)!r}" for name in cls.__record_shown__)
    return f"{cls.__qualname__}({shown})"


@dataclass_transform(frozen_default=True, field_specifiers=(dataclasses.field, dataclasses.Field))
def record(cls: type[_T]) -> type[_T]:
    """Make ``cls`` a frozen, slotted dataclass (see the module docstring).

    Examples
    --------
    >>> @record
    ... class Point:
    ...     x: float
    ...     y: float = 0.0
    >>> Point(1.0) == Point(1.0, 0.0), Point(1.0)
    (True, Point(x=1.0, y=0.0))
    """
    # Not frozen for the decorator (which would compile __setattr__ and __delattr__ and an
    # __init__ that sets each field through object.__setattr__): _setattr freezes instead.
    made: Any = dataclasses.dataclass(slots=True, eq=False, repr=False)(cls)
    fields = dataclasses.fields(made)
    # As the dataclass decorator chooses them: compare=False leaves a field out of __eq__
    # and, unless hash= says otherwise, out of __hash__.
    compared = tuple(f.name for f in fields if f.compare)
    hashed = tuple(f.name for f in fields if (f.compare if f.hash is None else f.hash))
    made.__record_compared__ = staticmethod(_getter(compared))
    made.__record_hashed__ = staticmethod(_getter(hashed))
    made.__record_shown__ = tuple(f.name for f in fields if f.repr)
    made.__setattr__ = _setattr
    made.__delattr__ = _delattr
    made.__eq__ = _eq
    made.__hash__ = _hash
    made.__repr__ = _repr
    result: type[_T] = made
    return result
