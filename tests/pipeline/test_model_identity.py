"""Every unit in the step log names the model file that decided it (its SHA-256)."""

from __future__ import annotations

import dataclasses
import hashlib
from pathlib import Path

import pytest

from stationcheck.config import load_config
from stationcheck.core.observations import UnitStarted
from stationcheck.core.sequencer import Sequencer
from stationcheck.demo_station.files import DEMO_CONFIG, SAMPLE_DIR
from stationcheck.vision.detector import bundled_model_path


def _unit_started_data(model_sha256: str) -> dict[str, object]:
    plan = dataclasses.replace(load_config(DEMO_CONFIG).to_plan(), model_sha256=model_sha256)
    sequencer = Sequencer(plan)
    _, _, events = sequencer.step(sequencer.initial_state(), UnitStarted(0.0, "PC-000001"))
    (started,) = [e for e in events if e.kind == "unit_started"]
    return dict(started.to_data())


@pytest.mark.parametrize(("sha", "expected"), [("ab" * 32, "ab" * 32), ("", None)])
def test_unit_started_carries_the_plan_model_hash(sha: str, expected: str | None) -> None:
    assert _unit_started_data(sha).get("model_sha256") == expected


def test_replayed_units_name_the_bundled_model_file(tmp_path: Path) -> None:
    from stationcheck.pipeline.session import ReplaySettings, run_replay
    from stationcheck.store.sqlite_log import SqliteStepLog

    run_replay(
        ReplaySettings(
            config_path=DEMO_CONFIG,
            log_path=tmp_path / "log.sqlite",
            video=SAMPLE_DIR / "demo_station.mp4",
            inputs=SAMPLE_DIR / "demo_station_inputs.jsonl",
            max_frames=15,
        )
    )
    log = SqliteStepLog(tmp_path / "log.sqlite")
    try:
        started = [s.event for s in log.events() if s.event.kind == "unit_started"]
    finally:
        log.close()
    # Reference: hashlib's SHA-256 of the shipped file's bytes, as `sha256sum` prints it.
    expected = hashlib.sha256(bundled_model_path().read_bytes()).hexdigest()
    assert started and all(e.to_data()["model_sha256"] == expected for e in started)
