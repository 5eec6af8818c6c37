"""Fixtures for step-log tests: logs of both kinds, and a runner of real sequencer events."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path

import pytest
from step_log_helpers import QUICK, append_all, sequencer_batches

from stationcheck.store import MemoryStepLog, SqliteStepLog, StepLog
from stationcheck.store.synthetic import StationScript


@pytest.fixture(params=["sqlite", "memory"])
def any_log(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[StepLog]:
    log: StepLog = (
        SqliteStepLog(tmp_path / "log.sqlite", synchronous=QUICK)
        if request.param == "sqlite"
        else MemoryStepLog()
    )
    yield log
    log.close()


@pytest.fixture
def logged(any_log: StepLog) -> Callable[[StationScript], StepLog]:
    """Run a script through the sequencer into the log; returns the log."""

    def run(script: StationScript) -> StepLog:
        batches, _ = sequencer_batches(script)
        append_all(any_log, batches)
        return any_log

    return run
