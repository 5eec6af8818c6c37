"""Fixtures for review tests: a small step log written by the real sequencer."""

from __future__ import annotations

import sqlite3
from collections.abc import Iterator
from pathlib import Path

import pytest
from review_logs import scripted_units, sequencer_events, write_log

from stationcheck.core.events import Event
from stationcheck.store import SqliteStepLog
from stationcheck.store.synthetic import StationScript


@pytest.fixture(scope="session")
def scripted_batches() -> list[tuple[Event, ...]]:
    return sequencer_events(scripted_units(StationScript()))


@pytest.fixture(scope="session")
def scripted_log(tmp_path_factory: pytest.TempPathFactory,
                 scripted_batches: list[tuple[Event, ...]]) -> Path:
    return write_log(tmp_path_factory.mktemp("review") / "log.sqlite", scripted_batches)


@pytest.fixture
def review_conn(scripted_log: Path) -> Iterator[sqlite3.Connection]:
    with SqliteStepLog(scripted_log, readonly=True) as log:
        yield log.connection
