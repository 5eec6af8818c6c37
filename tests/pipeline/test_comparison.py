"""Comparing a run's decisions with expected ones, and counting enables away from the target."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.observations import PositionRef
from stationcheck.core.plan import FastenStep, StationPlan, Thresholds, ZoneSpec
from stationcheck.errors import InputFileError
from stationcheck.pipeline.comparison import compare_decisions, count_false_enables
from stationcheck.pipeline.decision_trace import FramedEvent, FrameState
from stationcheck.pipeline.expected import (
    Decision,
    decisions_from_events,
    number_passes,
    read_expected,
)
from stationcheck.pipeline.truth_rows import TruthRow
from stationcheck.pipeline.truth_sidecar import TruthTable
from tests.event_examples import alarm, tightening, unit_ended, unit_started


def d(frame: int, kind: str, serial: str | None = "U-1", **data: Any) -> Decision:
    return Decision(frame, kind, serial, data)


ON_A = {"on": True, "zone": "A"}
CASES = [
    # (expected, actual, {problem: count} of mismatches, paired enable offsets)
    ([d(10, "enable", **ON_A)], [d(10, "enable", **ON_A)], {}, [0]),
    ([d(10, "enable", **ON_A)], [d(13, "enable", **ON_A)], {}, [3]),
    ([d(10, "enable", **ON_A)], [d(14, "enable", **ON_A)], {"timing": 1}, []),
    ([d(10, "enable", **ON_A)], [d(9, "enable", on=True, zone="B")],
     {"missing": 1, "extra": 1}, []),
    ([d(10, "enable", **ON_A), d(40, "enable", **ON_A)], [d(41, "enable", **ON_A)],
     {"missing": 1}, [1]),
    ([d(5, "position_result", zone="A", attempt=1, ok=False)],
     [d(5, "position_result", zone="A", attempt=1, ok=True)], {"differs": 1}, []),
    ([d(5, "unit_result", result="NOK", failed=["A"])],
     [d(25, "unit_result", result="NOK", failed=["A"])], {}, []),
    ([d(5, "unit_result", result="NOK", failed=["A"])],
     [d(5, "unit_result", result="NOK", failed=["B"])], {"differs": 1}, []),
    ([d(5, "alarm", alarm="wrong_bin", zone="bin_a")], [], {"missing": 1}, []),
    ([], [d(5, "alarm", alarm="tool_lost", zone=None)], {"extra": 1}, []),
]


@pytest.mark.parametrize(("expected", "actual", "problems", "offsets"), CASES)
def test_decisions_are_paired_by_identity_and_time(
    expected: list[Decision], actual: list[Decision], problems: dict[str, int],
    offsets: list[int],
) -> None:
    result = compare_decisions(number_passes(expected), number_passes(actual))
    found: dict[str, int] = {}
    for mismatch in result.mismatches:
        found[mismatch.problem] = found.get(mismatch.problem, 0) + 1
    assert found == problems
    assert result.edge_offsets_frames == offsets


def test_a_serial_seen_again_after_its_result_is_a_second_pass() -> None:
    passes = number_passes([
        d(1, "enable", **ON_A), d(2, "unit_result", result="NOK", failed=["A"]),
        d(3, "enable", **ON_A), d(4, "unit_result", result="OK", failed=[]),
        d(5, "alarm", serial=None, alarm="camera_moved"),
    ])
    assert [p.pass_no for p in passes] == [1, 1, 2, 2, 0]


def test_events_become_decisions_in_the_same_vocabulary() -> None:
    failed = (PositionRef("f", "A"),)
    framed = [FramedEvent(f, e) for f, e in [
        (1, unit_started(0.0, "U-1")),
        (2, ev.ToolEnabled(0.0, "U-1", step="f", zone="A", position=1, attempt=1,
                           reason="tip_at_target")),
        (3, tightening(0.0, "U-1", zone="A", result="NotOK")),
        (3, ev.ToolInhibited(0.0, "U-1", step="f", zone="B", reason="tip_not_at_target")),
        (4, alarm(0.0, "U-1", code="duplicate_result", severity="warning", subject="7")),
        (5, alarm(0.0, "U-1", code="wrong_position", severity="alarm", subject="B")),
        (6, ev.PositionFailed(0.0, "U-1", step="f", zone="A", position=1, attempts=2,
                              rework=False)),
        (7, ev.StepCompleted(0.0, "U-1", step="f", step_kind="fasten", index=0, result="NotOK",
                             ended_by="completed", started_t_s=None, failed_positions=failed)),
        (7, unit_ended(0.0, "U-1", result="NotOK", failed_positions=failed)),
        (8, unit_started(0.0, "U-2")),
    ]]
    out = [(x.frame, x.kind, x.serial, dict(x.data), x.pass_no)
           for x in decisions_from_events(framed, end_frame=20)]
    assert out == [
        (2, "enable", "U-1", {"on": True, "zone": "A"}, 1),
        (3, "position_result", "U-1", {"zone": "A", "attempt": 1, "ok": False}, 1),
        (3, "enable", "U-1", {"on": False, "zone": "A", "reason": "tip_not_at_target"}, 1),
        (5, "alarm", "U-1", {"alarm": "wrong_position", "zone": "B"}, 1),
        (6, "rework_mark", "U-1", {"zone": "A"}, 1),
        (7, "step_done", "U-1", {"step": "f", "failed": ["A"]}, 1),
        (7, "unit_result", "U-1", {"result": "NOK", "failed": ["A"], "rework": False,
                                   "ended_by": "completed"}, 1),
        (20, "unit_result", "U-2", {"result": "not_released", "failed": [], "rework": False,
                                    "ended_by": "open_at_end"}, 1),
    ]


@pytest.mark.parametrize(
    ("line", "message"),
    [
        ({"frame": -1, "kind": "enable", "serial": None}, "frame must be a whole number"),
        ({"frame": 3, "kind": "teleport", "serial": None}, "kind must be one of"),
        ({"frame": 3, "kind": "alarm", "serial": 12}, "serial must be text or null"),
        ({"frame": 3, "kind": "alarm", "serial": None, "alarm": "tool_lost"}, None),
    ],
)
def test_expected_file_lines_are_checked(tmp_path: Path, line: dict[str, Any],
                                         message: str | None) -> None:
    path = tmp_path / "x_expected.jsonl"
    path.write_text(json.dumps(line) + "\n", encoding="utf-8")
    if message is None:
        assert read_expected(path)[0].data == {"alarm": "tool_lost"}
    else:
        with pytest.raises(InputFileError, match=f"x_expected.jsonl:1: {message}"):
            read_expected(path)


def _row(frame: int, x: float, y: float) -> TruthRow:
    return TruthRow(frame, frame / 30, x, y, 2, 0, 0, 0, x, y, 0, 0, "", 0, 0, 0, 1, 0, 0, 0, "U")


def test_false_enables_are_frames_enabled_with_the_true_tip_off_target() -> None:
    zone = ZoneSpec("A", "fastener", ((100, 100), (130, 100), (130, 130), (100, 130)))
    plan = StationPlan((zone,), (FastenStep("f", ("A",)),), Thresholds(hysteresis_px=4))
    tips = {0: (115, 115), 1: (133, 115), 2: (135, 115), 3: (300, 300), 4: (300, 300),
            5: (300, 300), 6: (300, 300), 7: (300, 300)}
    truth = TruthTable(Path("truth.csv"), {f: _row(f, *xy) for f, xy in tips.items()})
    states = [FrameState(f, f / 30, enabled=f not in (6,), target_zone="A", serial="U",
                         running=f == 4) for f in range(8)]
    result = count_false_enables(states, truth, plan)
    # frame 1 is 3 px outside (within the 4 px hysteresis); 4 runs a tightening; 6 is off
    assert result.episodes == ((2, 3), (5, 5), (7, 7))
    assert result.frames == 4
