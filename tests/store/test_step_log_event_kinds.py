"""Every event kind goes into the step log and comes back as the same typed event; the events
table holds the same JSON text as before (SQLite's own json_extract reads it); a stored row
that does not fit its kind is one clear StoreError line."""

from __future__ import annotations

import json
import sqlite3
from contextlib import closing
from pathlib import Path

import pytest
from step_log_helpers import QUICK

from stationcheck.core.events import Event
from stationcheck.errors import StoreError
from stationcheck.store import SqliteStepLog, StepLog
from stationcheck.store.sql_tables import dump_json
from tests.event_examples import FULL, MINIMAL, unit_ended, unit_started

EVENTS: list[Event] = [*FULL.values(), *MINIMAL.values()]


def test_every_kind_round_trips_through_the_log(any_log: StepLog) -> None:
    any_log.append(EVENTS, 100.0)
    assert [stored.event for stored in any_log.events()] == EVENTS


def test_the_events_table_keeps_kind_and_data_as_json_text(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path, synchronous=QUICK) as log:
        log.append(EVENTS, 100.0)
    with closing(sqlite3.connect(path)) as conn:
        rows = conn.execute("SELECT kind, data, json_extract(data, '$.model_sha256') "
                            "FROM events ORDER BY seq").fetchall()
    assert [(kind, data) for kind, data, _ in rows] == [
        (e.kind, dump_json(e.to_data())) for e in EVENTS]
    assert rows[0][2] == "ab" * 32  # SQLite's JSON functions read what the log wrote
    with SqliteStepLog(path, readonly=True) as again:
        assert [s.event for s in again.events()] == EVENTS


@pytest.mark.parametrize(("data", "message"), [
    ({"released": True}, "unit_ended event: missing keys"),
    ({**unit_ended(2.0, "PC-1").to_data(), "operator": "demo"}, "unknown keys ['operator']"),
    ({**unit_ended(2.0, "PC-1").to_data(), "cycle_time_s": "long"}, "must be a finite number"),
])
def test_a_stored_event_that_does_not_fit_its_kind_is_one_error_line(
    tmp_path: Path, data: dict[str, object], message: str
) -> None:
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path, synchronous=QUICK) as log:
        log.append([unit_started(1.0, "PC-1")], 100.0)
    with closing(sqlite3.connect(path)) as conn, conn:
        conn.execute("INSERT INTO events (t_s, kind, serial, data, recorded_at_s) "
                     "VALUES (2.0, 'unit_ended', 'PC-1', ?, 101.0)", (json.dumps(data),))
    with SqliteStepLog(path, readonly=True) as log, pytest.raises(StoreError) as caught:
        log.events()
    text = str(caught.value)
    assert "stored event 2 is malformed" in text and message in text and "\n" not in text
