"""The derived tables are a pure function of the events: drop them, rebuild, get the same rows."""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

from step_log_helpers import QUICK, RECORDED_AT_S, table_rows

from stationcheck.store import MemoryStepLog, SqliteStepLog, log_schema
from stationcheck.store.generator import generate_log
from stationcheck.store.sql_tables import dump_json
from stationcheck.store.sqlite_log import refill_derived
from stationcheck.store.synthetic import UnitStream


def fill(log: SqliteStepLog | MemoryStepLog, units: int, seed: int = 3) -> None:
    """One append per unit (a commit per sequencer step is tested elsewhere)."""
    stream = UnitStream(seed)
    for index, (_, batches) in enumerate(stream.units(units)):
        log.append([e for batch in batches for e in batch], RECORDED_AT_S + index)


def test_dropped_tables_are_rebuilt_identically(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path, synchronous=QUICK) as log:
        fill(log, 60)
    before = table_rows(path)
    assert len(before["units"]) == 60 and before["steps"] and before["alarms"]
    conn = sqlite3.connect(path)
    conn.executescript("DROP TABLE units; DROP TABLE steps; DROP TABLE alarms;")
    conn.close()
    with SqliteStepLog(path) as log:
        count = log.rebuild()
        assert count == len(log.events())
    assert table_rows(path) == before


def test_rebuild_in_small_chunks_gives_the_same_rows(tmp_path: Path) -> None:
    """Chunk borders fall between a result and its position decision, and between an alarm and
    its clearing; the buffered writer must then update rows already written."""
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path, synchronous=QUICK) as log:
        fill(log, 30, seed=5)
    before = table_rows(path)
    with SqliteStepLog(path) as log:
        log.connection.execute("BEGIN IMMEDIATE")
        log_schema.recreate_derived(log.connection)
        refill_derived(log.connection, chunk_events=7)
        log.connection.execute("COMMIT")
    assert table_rows(path) == before


def test_memory_log_rebuild_keeps_its_rows() -> None:
    log = MemoryStepLog()
    fill(log, 20)
    page = log.units()
    steps = [log.steps(u.serial) for u in page.rows]
    assert log.rebuild() == len(log.events())
    assert log.units() == page and [log.steps(u.serial) for u in page.rows] == steps


def test_generated_log_is_what_the_append_path_writes(tmp_path: Path) -> None:
    """The fast generator writes rows itself; rebuilding from its events must not change them,
    and its events must be the rendered stories of the same draws."""
    path = tmp_path / "generated.sqlite"
    events = generate_log(path, 150, seed=11)
    before = table_rows(path)
    assert len(before["units"]) == 150
    with SqliteStepLog(path) as log:
        assert log.rebuild() == events
        stored = log.events(limit=2000)
    assert table_rows(path) == before
    stream = UnitStream(11)
    rendered = [e for _, batches in stream.units(10) for b in batches for e in b]
    assert [s.event for s in stored[: len(rendered)]] == rendered
    assert all(s.recorded_at_s == s.event.t_s for s in stored)


def test_generator_event_text_is_canonical_json(tmp_path: Path) -> None:
    path = tmp_path / "generated.sqlite"
    generate_log(path, 40, seed=2)
    conn = sqlite3.connect(path)
    texts = [row[0] for row in conn.execute("SELECT data FROM events")]
    conn.close()
    assert texts and all(text == dump_json(json.loads(text)) for text in texts)
