"""Typed events: every kind survives a JSON round trip (Python's json module is the reference for
the text), data that does not fit its kind is refused in one line, and the data objects the
untyped events wrote (copied from a sample-video step log) read and write back byte for byte."""

from __future__ import annotations

import dataclasses
import inspect
import json
from pathlib import Path
from typing import Any

import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.event_reference import event_reference
from stationcheck.core.events import EVENT_CLASSES, Event, EventDataError
from stationcheck.errors import InputFileError
from tests.event_examples import FULL, MINIMAL

OLD_DATA = Path(__file__).parent / "data" / "events_before_typing.jsonl"
EXAMPLES = [*FULL.values(), *MINIMAL.values()]


def _text(data: dict[str, Any]) -> str:
    """What the step log writes for ``data`` (``store.sql_tables.dump_json``)."""
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


@pytest.mark.parametrize("event", EXAMPLES, ids=lambda e: e.kind)
def test_every_kind_round_trips_through_json(event: Event) -> None:
    text = json.dumps(event.to_dict(), allow_nan=False)
    again = Event.from_dict(json.loads(text))
    assert again == event and type(again) is type(event)
    assert json.dumps(again.to_dict(), allow_nan=False) == text


def test_fields_some_events_carry_are_left_out_at_their_default() -> None:
    assert "model_sha256" not in MINIMAL["unit_started"].to_data()
    assert FULL["unit_started"].to_data()["model_sha256"] == "ab" * 32
    assert set(MINIMAL["step_completed"].to_data()) == {
        "step", "kind", "index", "result", "ended_by", "started_t_s", "failed_positions"}
    assert MINIMAL["step_completed"].to_data()["started_t_s"] is None  # always written


def _required_keys() -> list[tuple[str, str]]:
    return [(kind, key) for kind, event in MINIMAL.items() for key in event.to_data()
            if (kind, key) not in {("unit_started", "station"), ("unit_ended", "failed_checks")}]


@pytest.mark.parametrize(("kind", "key"), _required_keys())
def test_a_missing_key_is_an_error(kind: str, key: str) -> None:
    raw = MINIMAL[kind].to_dict()
    del raw["data"][key]
    with pytest.raises(InputFileError) as caught:
        Event.from_dict(raw)
    message = str(caught.value)
    assert f"missing keys ['{key}']" in message and kind in message and "\n" not in message


@pytest.mark.parametrize(("kind", "data", "message"), [
    ("station_reset", {"reason": "x", "operator": "demo"}, "unknown keys ['operator']"),
    ("run_stopped", {"awaiting_result": "yes"}, "awaiting_result must be true or false"),
    ("run_started", {"step": "f", "zone": "s1", "position": 1.5}, "must be a whole number"),
    ("unit_ended", {**MINIMAL["unit_ended"].to_data(), "failed_positions": [{"zone": "s1"}]},
     "failed_positions[0]: missing keys ['step']"),
    ("tightening_result", {**MINIMAL["tightening_result"].to_data(),
                           "torque": {"value": 1.0, "low": None, "high": None}},
     "torque: missing keys ['unit']"),
    ("picture_quality", {**FULL["picture_quality"].to_data(), "brightness": None},
     "brightness must be a finite number, got None"),
    ("unit_started", [], "data must be an object"),
    ("party", {}, "event kind must be one of"),
])
def test_data_that_does_not_fit_its_kind_is_refused(kind: str, data: Any, message: str) -> None:
    with pytest.raises(EventDataError, match=message.replace("[", r"\[").replace("]", r"\]")):
        Event.from_data(1.0, kind, "PC-1", data)


def test_old_logs_lack_what_was_added_later() -> None:
    started = MINIMAL["unit_started"].to_data()
    del started["station"]
    event = Event.from_data(1.0, "unit_started", "PC-1", started)
    assert isinstance(event, ev.UnitStarted)
    assert (event.station, event.model_sha256, event.demo_data) == ("", "", False)
    ended = MINIMAL["unit_ended"].to_data()
    del ended["failed_checks"]
    event = Event.from_data(9.0, "unit_ended", "PC-1", ended)
    assert isinstance(event, ev.UnitEnded) and event.failed_checks == ()


def test_data_written_before_the_kinds_were_typed_reads_and_writes_back_the_same() -> None:
    lines = OLD_DATA.read_text(encoding="utf-8").splitlines()
    kinds = set()
    for line in lines:
        row = json.loads(line)
        event = Event.from_data(row["t_s"], row["kind"], row["serial"], json.loads(row["data"]))
        assert _text(event.to_data()) == row["data"]
        kinds.add(event.kind)
    assert kinds == set(EVENT_CLASSES)


def test_every_kind_is_registered_once_and_documented() -> None:
    classes = [c for _, c in inspect.getmembers(ev, inspect.isclass)
               if issubclass(c, Event) and c is not Event]
    assert {c.kind: c for c in classes} == EVENT_CLASSES
    for cls in classes:
        assert dataclasses.is_dataclass(cls) and cls.__dataclass_params__.frozen  # type: ignore[attr-defined]
        assert cls.__doc__ and len(cls.__doc__) > 40, cls.__name__
    with pytest.raises(TypeError, match="defined twice"):
        type("Again", (Event,), {"kind": "unit_started"})


def test_the_base_is_not_an_event_of_its_own() -> None:
    with pytest.raises(TypeError, match="base of the event kinds"):
        Event(1.0, None)


def test_the_event_reference_in_docs_is_current() -> None:
    """``docs/events.md`` is made by ``tools/event_reference``; run it after changing a kind."""
    written = (Path(__file__).parents[2] / "docs" / "events.md").read_text(encoding="utf-8")
    assert written == event_reference()
    assert all(f"## `{kind}`" in written for kind in EVENT_CLASSES)
