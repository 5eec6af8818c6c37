"""Station inputs: the JSON-lines reader and the merge into the frame stream by time."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from stationcheck.core.observations import (
    OperatorAck,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.errors import InputFileError
from stationcheck.pipeline.station_inputs import InputSchedule, read_station_inputs

GOOD_AND_BAD = [
    ({"t_s": 0.5, "kind": "unit_started", "serial": "PC-1"}, UnitStarted(0.5, "PC-1")),
    ({"t_s": 0.5, "kind": "unit_started", "serial": "PC-1", "rework": True, "frame": 15},
     UnitStarted(0.5, "PC-1", rework=True)),
    ({"t_s": 1.0, "kind": "tool_running", "on": True}, ToolRunning(1.0, True)),
    ({"t_s": 2.0, "kind": "tightening_result", "ok": False, "torque_nm": 5.1, "angle_deg": 11.3,
      "sequence": 7, "position": "screw_5"},
     TighteningResult(2.0, False, 5.1, 11.3, 7)),
    ({"t_s": 3.0, "kind": "operator_ack"}, OperatorAck(3.0)),
    ({"t_s": 1.0, "kind": "tool_runing", "on": True}, "kind must be one of"),
    ({"kind": "operator_ack"}, "needs t_s"),
    ({"t_s": 1.0, "kind": "tool_running"}, "needs on"),
    ({"t_s": 1.0, "kind": "tool_running", "on": "yes"}, "must be true or false"),
    ({"t_s": 1.0, "kind": "tightening_result", "ok": True, "torque": 5.0}, "does not take torque"),
    ({"t_s": "soon", "kind": "operator_ack"}, "finite number"),
    ([1, 2], "expected a JSON object"),
]


@pytest.mark.parametrize(("line", "expected"), GOOD_AND_BAD)
def test_each_input_line_is_read_or_refused_with_its_place(
    tmp_path: Path, line: object, expected: object
) -> None:
    path = tmp_path / "inputs.jsonl"
    path.write_text("\n" + json.dumps(line) + "\n", encoding="utf-8")
    if isinstance(expected, str):
        with pytest.raises(InputFileError) as info:
            read_station_inputs(path)
        assert f"{path}:2:" in str(info.value)
        assert expected in str(info.value)
        assert "\n" not in str(info.value)
    else:
        assert read_station_inputs(path) == (expected,)


def test_inputs_out_of_time_order_are_refused(tmp_path: Path) -> None:
    path = tmp_path / "inputs.jsonl"
    lines = [{"t_s": 2.0, "kind": "operator_ack"}, {"t_s": 1.0, "kind": "operator_ack"}]
    path.write_text("\n".join(json.dumps(x) for x in lines), encoding="utf-8")
    with pytest.raises(InputFileError, match=r"inputs.jsonl:2: inputs must be in time order"):
        read_station_inputs(path)


def test_a_missing_or_broken_file_is_one_clear_error(tmp_path: Path) -> None:
    with pytest.raises(InputFileError, match="station inputs file not found"):
        read_station_inputs(tmp_path / "nope.jsonl")
    broken = tmp_path / "broken.jsonl"
    broken.write_text('{"t_s": 1, "kind": ', encoding="utf-8")
    with pytest.raises(InputFileError, match=r"broken.jsonl:1: not valid JSON"):
        read_station_inputs(broken)


def test_an_input_comes_before_the_first_frame_at_or_after_its_time() -> None:
    fps = 30.0
    inputs = [OperatorAck(round(f / fps, 6)) for f in (0, 2, 2, 5)] + [OperatorAck(10.0)]
    schedule = InputSchedule(inputs)
    handed = {f: schedule.due(f / fps) for f in range(8)}
    # stamped with frame 2 (2/30 rounded to microseconds) -> applied before frame 2
    assert [len(handed[f]) for f in range(8)] == [1, 0, 2, 0, 0, 1, 0, 0]
    assert schedule.pending == 1
    assert schedule.due(10.0) == (OperatorAck(10.0),)
    assert schedule.pending == 0


def test_an_input_between_frames_waits_for_the_next_frame() -> None:
    schedule = InputSchedule([OperatorAck(0.05)])
    assert schedule.due(1 / 30) == ()
    assert schedule.due(2 / 30) == (OperatorAck(0.05),)


def test_a_run_that_starts_late_skips_earlier_inputs() -> None:
    schedule = InputSchedule([OperatorAck(0.1), OperatorAck(1.0), OperatorAck(2.0)])
    assert schedule.skip_before(1.0) == 1
    assert schedule.due(1.0) == (OperatorAck(1.0),)
