"""Helpers for step-log tests (imported by name: a module name unique across test folders)."""

from __future__ import annotations

import sqlite3
from pathlib import Path
from typing import Any

from stationcheck.core.events import Event
from stationcheck.core.sequencer import Sequencer
from stationcheck.core.state import SequencerState
from stationcheck.store import StepLog
from stationcheck.store.synthetic import StationScript, demo_plan

Batch = tuple[Event, ...]
RECORDED_AT_S = 1_750_000_000.0
# Tests not about durability skip the fsync per commit (WAL + NORMAL still survives a killed
# process; only power loss needs FULL) so the suite stays fast on a busy machine.
QUICK = "NORMAL"


def sequencer_batches(
    script: StationScript, state: SequencerState | None = None
) -> tuple[list[Batch], SequencerState]:
    """The events the real sequencer emits for the script, one batch per step that emitted."""
    sequencer = Sequencer(demo_plan())
    state = state if state is not None else sequencer.initial_state()
    batches: list[Batch] = []
    for observation in script.observations:
        state, _, events = sequencer.step(state, observation)
        if events:
            batches.append(events)
    return batches, state


def append_all(log: StepLog, batches: list[Batch], recorded_at_s: float = RECORDED_AT_S) -> None:
    for index, batch in enumerate(batches):
        log.append(batch, recorded_at_s + index)


def table_rows(path: Path) -> dict[str, list[tuple[Any, ...]]]:
    """Every derived row, ordered, straight from the file (no store code in between)."""
    conn = sqlite3.connect(path)
    try:
        return {
            "units": conn.execute("SELECT * FROM units ORDER BY serial").fetchall(),
            "steps": conn.execute("SELECT * FROM steps ORDER BY seq").fetchall(),
            "alarms": conn.execute("SELECT * FROM alarms ORDER BY seq").fetchall(),
            "unit_tags": conn.execute("SELECT * FROM unit_tags ORDER BY tag, serial").fetchall(),
        }
    finally:
        conn.close()
