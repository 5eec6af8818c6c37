"""Events: the append-only truth of what happened to units, steps, the tool and alarms.

A step log stores these as they come; units, steps and alarms are views over them, and
:func:`stationcheck.core.progress.rebuild_unit` folds them back into an open unit after a restart.

Each kind is one frozen dataclass in :mod:`stationcheck.core.event_kinds` (its docstring is the
reference for the kind and its fields); :data:`EVENT_CLASSES` maps the kind's name to its class.
On disk an event is ``kind`` plus a ``data`` JSON object holding the kind's fields
(:meth:`Event.to_data`); :meth:`Event.from_data` turns that back into the typed event, and a
missing or unknown key, or a value of the wrong type, is an error. A field declared with
:func:`written_if_set` is left out of ``data`` while it holds its default (it belongs to only
some events of the kind); any other field is always written. A field with a plain default is
one that logs written before it existed lack; reading such a log gives the default.
"""

from __future__ import annotations

import dataclasses
import math
import types
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import cache
from typing import Any, ClassVar, Union, get_args, get_origin, get_type_hints

from stationcheck.errors import InputFileError

# Result vocabulary of the OPC UA joining result model where it fits.
RESULT_OK = "OK"
RESULT_NOK = "NotOK"
RESULT_UNDECIDED = "NotDecidable"

_WRITTEN_IF_SET = "written_if_set"
_ENVELOPE = frozenset({"t_s", "serial"})

Convert = Callable[[Any, str], Any]


class EventDataError(ValueError):
    """An event's data does not fit its kind: a missing or unknown key or a wrong value."""


def written_if_set(default: Any = None) -> Any:
    """A field only some events of the kind carry: left out of ``data`` at its default."""
    return dataclasses.field(default=default, metadata={_WRITTEN_IF_SET: True})


def _scalar(kinds: type | tuple[type, ...], word: str, finite: bool = False) -> Convert:
    def convert(value: Any, where: str) -> Any:
        given: Any = value
        if (
            not isinstance(value, kinds)
            or (kinds is not bool and isinstance(value, bool))
            or (finite and not math.isfinite(given))
        ):
            raise EventDataError(f"{where} must be {word}, got {value!r}")
        return value

    return convert


_SCALARS: dict[Any, Convert] = {
    str: _scalar(str, "text"),
    bool: _scalar(bool, "true or false"),
    int: _scalar(int, "a whole number"),
    float: _scalar((int, float), "a finite number", finite=True),
}


@cache
def _converter(hint: Any) -> Convert:
    """Checks a value against a field's type, accepting the typed or the JSON form (a list for a
    tuple, an object for a record); returns the typed form."""
    if hint in _SCALARS:
        return _SCALARS[hint]
    origin, args = get_origin(hint), get_args(hint)
    if origin in (Union, types.UnionType):
        inner = _converter(next(a for a in args if a is not type(None)))
        return lambda value, where: None if value is None else inner(value, where)
    if origin is tuple:
        item = _converter(args[0])

        def convert_tuple(value: Any, where: str) -> tuple[Any, ...]:
            if not isinstance(value, list | tuple):
                raise EventDataError(f"{where} must be a list, got {value!r}")
            return tuple(item(v, f"{where}[{i}]") for i, v in enumerate(value))

        return convert_tuple
    if isinstance(hint, type) and dataclasses.is_dataclass(hint):
        record = hint

        def convert_record(value: Any, where: str) -> Any:
            if isinstance(value, record):
                return value
            if not isinstance(value, Mapping):
                raise EventDataError(f"{where} must be an object, got {value!r}")
            return record(**_fields_from(record, value, where))

        return convert_record
    raise TypeError(f"no event field type {hint!r}")


@dataclass(frozen=True)
class _Field:
    name: str
    key: str  # its name in ``data``
    label: str  # its name in messages: ``Class.field``
    convert: Convert
    default: Any
    written_if_set: bool


@dataclass(frozen=True)
class _Shape:
    fields: tuple[_Field, ...]
    keys: frozenset[str]
    required: tuple[str, ...]


_SHAPES: dict[type, _Shape] = {}


def _shape(cls: type) -> _Shape:
    """The fields of a record or event (not t_s, serial) as ``data`` holds them; a class's
    ``data_keys`` names the fields stored under another key."""
    shape = _SHAPES.get(cls)
    if shape is None:
        hints, keys = get_type_hints(cls), getattr(cls, "data_keys", {})
        own = [f for f in dataclasses.fields(cls) if f.name not in _ENVELOPE]
        fields = tuple(
            _Field(
                f.name,
                keys.get(f.name, f.name),
                f"{cls.__name__}.{f.name}",
                _converter(hints[f.name]),
                f.default,
                bool(f.metadata.get(_WRITTEN_IF_SET)),
            )
            for f in own
        )
        required = tuple(
            keys.get(f.name, f.name)
            for f in own
            if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING
        )
        shape = _SHAPES[cls] = _Shape(fields, frozenset(f.key for f in fields), required)
    return shape


def _fields_from(cls: type, data: Mapping[str, Any], where: str) -> dict[str, Any]:
    shape = _shape(cls)
    if not shape.keys.issuperset(data):
        raise EventDataError(f"{where}: unknown keys {sorted(set(data) - shape.keys)}")
    missing = [key for key in shape.required if key not in data]
    if missing:
        raise EventDataError(f"{where}: missing keys {missing}")
    return {f.name: data[f.key] for f in shape.fields if f.key in data}


def _encode(value: Any) -> Any:
    if isinstance(value, tuple):
        return [_encode(v) for v in value]
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return record_data(value)
    return value


def record_data(record: Any) -> dict[str, Any]:
    """The JSON object of a record or an event's fields (what ``data`` holds)."""
    out: dict[str, Any] = {}
    for f in _shape(type(record)).fields:
        value = getattr(record, f.name)
        if f.written_if_set and value == f.default:
            continue
        out[f.key] = _encode(value)
    return out


def check_fields(record: Any) -> None:
    """Check (and turn lists and objects into tuples and records) every field of a record."""
    for f in _shape(type(record)).fields:
        value = getattr(record, f.name)
        checked = f.convert(value, f.label)
        if checked is not value:
            object.__setattr__(record, f.name, checked)


EVENT_CLASSES: dict[str, type[Event]] = {}


@dataclass(frozen=True)
class Event:
    """One thing that happened; ``serial`` is None for station-level events (e.g. link lost).

    Not made directly: each kind is a subclass (see :mod:`stationcheck.core.event_kinds`).
    """

    kind: ClassVar[str] = ""
    t_s: float
    serial: str | None

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if "kind" in cls.__dict__:
            if cls.kind in EVENT_CLASSES:
                raise TypeError(f"event kind {cls.kind!r} is defined twice")
            EVENT_CLASSES[cls.kind] = cls

    def __post_init__(self) -> None:
        name = type(self).__name__
        if not self.kind:
            raise TypeError("Event is the base of the event kinds; make one of those")
        _SCALARS[float](self.t_s, f"{name}.t_s")
        if self.serial is not None and (not isinstance(self.serial, str) or not self.serial):
            raise ValueError(
                f"{name}.serial must be a non-empty string or None, got {self.serial!r}"
            )
        check_fields(self)

    def to_data(self) -> dict[str, Any]:
        """The ``data`` object the step log stores for this event."""
        return record_data(self)

    def to_dict(self) -> dict[str, Any]:
        return {"t_s": self.t_s, "kind": self.kind, "serial": self.serial, "data": self.to_data()}

    @staticmethod
    def from_data(t_s: float, kind: str, serial: str | None, data: Mapping[str, Any]) -> Event:
        """The typed event of a stored row; ValueError names what is missing or wrong."""
        cls = EVENT_CLASSES.get(kind)
        if cls is None:
            raise EventDataError(f"event kind must be one of {sorted(EVENT_CLASSES)}, got {kind!r}")
        if not isinstance(data, Mapping):
            raise EventDataError(f"{kind} event data must be an object, got {data!r}")
        try:
            return cls(t_s=t_s, serial=serial, **_fields_from(cls, data, f"{kind} event"))
        except TypeError as exc:
            raise EventDataError(f"{kind} event is malformed: {exc}") from exc

    @staticmethod
    def from_dict(raw: Mapping[str, Any]) -> Event:
        """The inverse of :meth:`to_dict`; a malformed event raises :class:`InputFileError`."""
        expected = {"t_s", "kind", "serial", "data"}
        if set(raw) != expected:
            raise InputFileError(f"event keys must be {sorted(expected)}, got {sorted(raw)}")
        try:
            return Event.from_data(raw["t_s"], raw["kind"], raw["serial"], raw["data"])
        except ValueError as exc:
            raise InputFileError(f"event is malformed: {exc}") from exc


# The kinds register themselves on definition; importing them here makes the registry whole
# wherever events are read.
import stationcheck.core.event_kinds  # noqa: F401
