"""The sample video (demo data) against its stored expected decisions and ground truth.

Two runs of the whole video: with the ground-truth keypoints and judgements (the decision logic
and the glue, no model), and the ``stationcheck demo`` run (the bundled model and the image
judgements; the ground-truth keypoints only if the model file is missing, which the run says).
The expected decisions come from ``stationcheck/demo_station/decisions.py``, written apart from
the sequencer; the two must agree on every decision.
"""

from __future__ import annotations

import json
import sqlite3
from contextlib import closing
from pathlib import Path
from typing import Any

import pytest

from stationcheck.cli import main
from stationcheck.pipeline.session import ReplaySettings, run_replay
from tests.pipeline.conftest import CONFIG, EXPECTED, INPUTS, TRUTH, VIDEO, needs_sample

pytestmark = [needs_sample, pytest.mark.slow]

Run = tuple[dict[str, Any], Path]


@pytest.fixture(scope="module")
def truth_run(tmp_path_factory: pytest.TempPathFactory) -> Run:
    log = tmp_path_factory.mktemp("truth_run") / "log.sqlite"
    report = run_replay(ReplaySettings(
        config_path=CONFIG, log_path=log, video=VIDEO, inputs=INPUTS, expected=EXPECTED,
        truth=TRUTH, detector="truth", judges="truth",
    ))
    return report.to_json(), log


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> Run:
    out = tmp_path_factory.mktemp("demo") / "out"
    assert main(["demo", "--out", str(out), "--json"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    return summary, out / "step-log.sqlite"


@pytest.fixture(params=["truth_run", "demo_run"])
def run(request: pytest.FixtureRequest) -> Run:
    return request.getfixturevalue(request.param)  # type: ignore[no-any-return]


def _events(log: Path) -> list[tuple[str, str | None, dict[str, Any]]]:
    with closing(sqlite3.connect(log)) as conn:
        rows = conn.execute("SELECT kind, serial, data FROM events ORDER BY seq").fetchall()
    return [(kind, serial, json.loads(data)) for kind, serial, data in rows]


def _units(summary: dict[str, Any]) -> dict[tuple[str, str], dict[str, Any]]:
    return {(u["serial"], u["pass"]): u for u in summary["units"]}


def test_no_enable_away_from_the_target(run: Run) -> None:
    summary, _ = run
    assert summary["false_enables"] == 0
    assert summary["false_enable_episodes"] == 0


def test_decisions_match_the_expected_ones_exactly(run: Run) -> None:
    summary, _ = run
    assert summary["mismatch_details"] == []
    assert summary["mismatches"] == 0
    assert summary["edge_offset_frames_max"] <= 3


def test_every_unit_ends_as_the_sample_says(run: Run) -> None:
    units = _units(run[0])
    results = {key: (u["result"], u["failed_positions"]) for key, u in units.items()}
    assert results == {
        ("PC-000101", "first"): ("OK", []),
        ("PC-000102", "first"): ("OK", []),
        ("PC-000103", "first"): ("OK", []),
        ("PC-000104", "first"): ("NOK", ["screw_3"]),
        ("PC-000104", "rework"): ("OK", []),
        ("PC-000105", "first"): ("NOK", []),  # the locking pin check failed
        ("PC-000106", "first"): ("OK", []),
        ("PC-000107", "first"): ("open", []),  # still open when the video ends
    }
    assert not units[("PC-000105", "first")]["released"]


def test_the_nok_retry_is_granted_as_a_new_attempt(run: Run) -> None:
    """PC-000103: screw_5 NOK, enable drops at the result, back after a new dwell."""
    events = [(kind, data) for kind, serial, data in _events(run[1]) if serial == "PC-000103"]
    edges = [(kind, data.get("attempt"), data.get("reason")) for kind, data in events
             if kind in ("tool_enabled", "tool_inhibited") and data.get("zone") == "screw_5"]
    first = edges.index(("tool_enabled", 1, "tip_at_target"))
    assert edges[first:first + 3] == [
        ("tool_enabled", 1, "tip_at_target"),
        ("tool_inhibited", None, "new_attempt_dwell"),
        ("tool_enabled", 2, "tip_at_target"),
    ]


def test_the_acknowledged_missing_pin_fails_the_check(run: Run) -> None:
    """PC-000105: the operator acknowledges with the locking pin left out."""
    events = [(kind, data) for kind, serial, data in _events(run[1]) if serial == "PC-000105"]
    codes = [data["code"] for kind, data in events if kind == "alarm_raised"]
    assert "check_failed" in codes and "unit_interrupted" not in codes
    end = next(data for kind, data in events if kind == "unit_ended")
    assert (end["result"], end["released"], end["ended_by"]) == ("NotOK", False, "check_failed")
    assert [check["step"] for check in end["failed_checks"]] == ["pin_engaged"]


def test_the_rework_pass_enables_only_the_failed_position(run: Run) -> None:
    events = _events(run[1])
    starts = [i for i, (kind, serial, data) in enumerate(events)
              if kind == "unit_started" and serial == "PC-000104" and data["rework"]]
    assert len(starts) == 1
    assert events[starts[0]][2]["rework_positions"] == [{"step": "fasten_cover", "zone": "screw_3"}]
    ends = [i for i, (kind, serial, _) in enumerate(events)
            if kind == "unit_ended" and serial == "PC-000104" and i > starts[0]]
    enabled = [data["zone"] for kind, _, data in events[starts[0]:ends[0]]
               if kind == "tool_enabled"]
    assert enabled and set(enabled) == {"screw_3"}


def test_the_camera_nudge_inhibits_until_the_end(run: Run) -> None:
    events = _events(run[1])
    moved = [i for i, (kind, _, data) in enumerate(events)
             if kind == "alarm_raised" and data["code"] == "camera_moved"]
    assert len(moved) == 1
    assert events[moved[0]][1] == "PC-000107"
    after = events[moved[0]:]
    assert not any(kind == "tool_enabled" for kind, _, _ in after)
    assert not any(kind == "alarm_cleared" and d["code"] == "camera_moved" for kind, _, d in after)


def test_the_tool_out_of_view_inhibits(run: Run) -> None:
    events = _events(run[1])
    lost = [i for i, (kind, serial, data) in enumerate(events)
            if kind == "alarm_raised" and data["code"] == "tool_lost"]
    assert [events[i][1] for i in lost] == ["PC-000106"]
    back = next(i for i, (kind, _, data) in enumerate(events)
                if i > lost[0] and kind == "alarm_cleared" and data["code"] == "tool_lost")
    state_before = [kind for kind, _, _ in events[:lost[0]]
                    if kind in ("tool_enabled", "tool_inhibited")]
    assert state_before[-1] == "tool_inhibited"
    assert not any(kind == "tool_enabled" for kind, _, _ in events[lost[0]:back])


def test_the_figures_a_person_asks_for_are_there(run: Run) -> None:
    summary, log = run
    for key in ("units", "false_enables", "mismatches", "mismatches_by_kind",
                "edge_offset_frames_median", "edge_offset_frames_max", "fps", "log_path"):
        assert key in summary
    assert summary["frames"] == 3475
    assert summary["fps"] > 0
    assert Path(summary["log_path"]) == log


def test_the_demo_leaves_everything_it_promised_in_its_folder(demo_run: Run) -> None:
    import cv2

    from stationcheck.cli import SAFETY_NOTE

    summary = demo_run[0]
    out = Path(summary["out_dir"])
    assert sorted(p.name for p in out.iterdir()) == [
        "annotated.mp4", "observations.jsonl", "step-log.sqlite", "summary.json", "summary.txt",
    ]
    assert (out / "summary.txt").read_text().splitlines()[0] == f"Safety: {SAFETY_NOTE}"
    assert (out / "summary.txt").read_text().splitlines()[1].startswith("DEMO DATA: ")
    assert summary["demo_data"] is True
    started = [data for kind, _, data in _events(demo_run[1]) if kind == "unit_started"]
    assert len(started) == 8 and all(data["demo_data"] is True for data in started)
    capture = cv2.VideoCapture(str(out / "annotated.mp4"))
    frames = int(capture.get(cv2.CAP_PROP_FRAME_COUNT))
    capture.release()
    assert frames == (3475 + 1) // 2  # one frame in two
    assert summary["annotated_video"] == str(out / "annotated.mp4")
