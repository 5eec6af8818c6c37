"""The event reference (``docs/events.md``) made from the event classes themselves, so it cannot
drift from them; ``tools/event_reference`` writes it and a test checks it is current."""

from __future__ import annotations

import dataclasses
from typing import Any, get_type_hints

from stationcheck.core import event_kinds
from stationcheck.core.events import EVENT_CLASSES, Event

_HEADER = """# Step log events

Made by `tools/event_reference` from `stationcheck/core/event_kinds.py`; edit the classes'
docstrings there, not this file. A stored event is one row of the step log's `events` table:
`t_s` (station seconds), `kind`, `serial` (the unit; empty for station-level events) and `data`,
a JSON object holding the kind's fields. Reading a row gives the kind's typed event; a missing
or unknown key, or a value of the wrong type, is an error. "only when set": the key is left out
while the field holds its default. "older logs: default": logs written before the field existed
lack it and read as the default. The sample video's step log reads and writes back byte for
byte (`tests/core/test_event_kinds.py`).
"""


def _type_name(hint: Any) -> str:
    text = str(hint) if not isinstance(hint, type) else hint.__name__
    return (
        text.replace("stationcheck.core.event_kinds.", "")
        .replace("stationcheck.core.observations.", "")
        .replace("typing.", "")
        .replace("|", "\\|")
    )


def _doc(cls: type) -> str:
    return " ".join((cls.__doc__ or "").split()).replace("``", "`")


def _fields_table(cls: type) -> list[str]:
    hints, keys = get_type_hints(cls), getattr(cls, "data_keys", {})
    lines = ["| key | type | written |", "|---|---|---|"]
    for f in dataclasses.fields(cls):
        if f.name in ("t_s", "serial"):
            continue
        if f.metadata.get("written_if_set"):
            written = f"only when set (default `{f.default!r}`)"
        elif f.default is not dataclasses.MISSING:
            written = f"always; older logs: `{f.default!r}`"
        else:
            written = "always"
        key = keys.get(f.name, f.name)
        name = f"`{key}`" if key == f.name else f"`{key}` (field `{f.name}`)"
        lines.append(f"| {name} | `{_type_name(hints[f.name])}` | {written} |")
    return lines


def event_reference() -> str:
    """The whole reference as Markdown."""
    out = [_HEADER]
    for kind, cls in EVENT_CLASSES.items():
        out += [f"## `{kind}` ({cls.__name__})", "", _doc(cls), "", *_fields_table(cls), ""]
    records = [
        c
        for c in vars(event_kinds).values()
        if isinstance(c, type) and dataclasses.is_dataclass(c) and not issubclass(c, Event)
    ]
    out += ["## Records inside events", ""]
    for record in sorted(records, key=lambda c: c.__name__):
        out += [f"### {record.__name__}", "", _doc(record), "", *_fields_table(record), ""]
    return "\n".join(out).rstrip("\n") + "\n"
