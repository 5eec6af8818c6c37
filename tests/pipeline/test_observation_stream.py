"""Recording what the sequencer saw and replaying it without the video gives the same events."""

from __future__ import annotations

import json
import sqlite3
from contextlib import closing
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stationcheck.core.observations import (
    CheckVerdict,
    Observation,
    PositionRef,
    TighteningResult,
    UnitStarted,
    ZoneObservation,
)
from stationcheck.core.plan import StationPlan
from stationcheck.errors import InputFileError
from stationcheck.pipeline.decision_core import DecisionStep
from stationcheck.pipeline.observation_stream import ObservationRecorder, read_observations
from stationcheck.pipeline.session import ReplaySettings, run_replay
from tests.pipeline.conftest import CONFIG, FIRST_UNIT_FRAMES, Replay, needs_sample

finite = st.floats(min_value=0, max_value=1e6, allow_nan=False)
observations = st.one_of(
    st.builds(UnitStarted, t_s=finite, serial=st.text(min_size=1).filter(str.strip),
              rework=st.just(True),
              rework_positions=st.lists(st.builds(PositionRef, st.just("f"), st.sampled_from(
                  ["s1", "s2"])), max_size=2).map(tuple)),
    st.builds(TighteningResult, t_s=finite, ok=st.booleans(),
              torque_nm=st.none() | st.floats(-100, 100), angle_deg=st.none() | finite,
              sequence=st.none() | st.integers(0, 2**31)),
    st.builds(CheckVerdict, t_s=finite, zone=st.just("pin"),
              verdict=st.sampled_from(["present", "absent", "undecided"])),
    st.builds(ZoneObservation, t_s=finite, frame_index=st.integers(0, 10**6), zone=st.none(),
              arrived_zone=st.none(), since_t_s=st.none(), dwell_ms=finite, visible=st.booleans(),
              tip_px=st.none() | st.tuples(finite, finite)),
)


@settings(deadline=None)  # loads a config on each example: slow on a busy machine
@given(st.lists(observations, max_size=8))
def test_any_recorded_stream_reads_back_equal(tmp_path_factory: pytest.TempPathFactory,
                                              stream: list[Observation]) -> None:
    from stationcheck.config import load_config

    plan = load_config(CONFIG).to_plan()
    path = tmp_path_factory.mktemp("obs") / "stream.jsonl"
    recorder = ObservationRecorder(path, plan, fps=30.0)
    for observation in stream:
        recorder.on_step(DecisionStep(observation, None, ()))  # type: ignore[arg-type]
    recorder.on_stop(None)
    assert list(read_observations(path, plan)) == stream


@needs_sample
def test_replaying_the_recorded_stream_gives_identical_events(
    replay: Replay, tmp_path: Path, demo_plan: StationPlan
) -> None:
    recorded = tmp_path / "observations.jsonl"
    report = replay(record_observations=recorded, max_frames=FIRST_UNIT_FRAMES)
    again = run_replay(ReplaySettings(
        config_path=CONFIG, log_path=tmp_path / "again.sqlite", observations=recorded,
    ))
    first = _events(tmp_path / "log.sqlite")
    second = _events(tmp_path / "again.sqlite")
    assert report.events == len(first) > 20
    assert second == first
    assert again.stats.frames == report.stats.frames == FIRST_UNIT_FRAMES
    assert [u.to_dict() for u in again.units] == [u.to_dict() for u in report.units]


def _events(path: Path) -> list[tuple[float, str, str | None, dict[str, object]]]:
    with closing(sqlite3.connect(path)) as conn:
        rows = conn.execute("SELECT t_s, kind, serial, data FROM events ORDER BY seq").fetchall()
    return [(t, k, s, json.loads(d)) for t, k, s, d in rows]


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("", "not an observation recording"),
        ('{"kind": "tick", "t_s": 1}\n', "not an observation recording"),
        ('{"stationcheck_observations": 9}\n', "format version 9"),
        ('{"stationcheck_observations": 1}\n{"kind": "tick", "t_s": 1}\n{"kind": "nope"}\n',
         ":3: observation kind must be one of"),
        ('{"stationcheck_observations": 1}\n{"kind": "tick"\n', ":2: not valid JSON"),
        ('{"stationcheck_observations": 1}\n{"kind": "tick", "t_s": 1}\n', None),
    ],
)
def test_a_bad_recording_is_refused_with_its_line(tmp_path: Path, text: str,
                                                  message: str | None) -> None:
    path = tmp_path / "obs.jsonl"
    path.write_text(text, encoding="utf-8")
    if message is None:
        assert len(list(read_observations(path))) == 1
        return
    with pytest.raises(InputFileError, match=message):
        list(read_observations(path))


def test_a_missing_recording_is_one_clear_error(tmp_path: Path) -> None:
    with pytest.raises(InputFileError, match="observations file not found"):
        list(read_observations(tmp_path / "none.jsonl"))
