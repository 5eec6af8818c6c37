"""Records validate on construction (expected vs actual) and survive a JSON round trip."""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.alarms import ALARMS
from stationcheck.core.events import EVENT_CLASSES, Event
from stationcheck.core.observations import (
    OBSERVATION_TYPES,
    Abort,
    BinActivity,
    CameraMoved,
    CheckVerdict,
    DetectorFault,
    FrameStale,
    LinkEvent,
    LinkStatus,
    Observation,
    OperatorAck,
    PictureState,
    PositionRef,
    Reset,
    Tick,
    TighteningResult,
    ToolRunning,
    UnitStarted,
    ZoneObservation,
    observation_from_dict,
    observation_to_dict,
)
from stationcheck.core.outputs import Guidance, Output
from stationcheck.core.records import ToolPose
from stationcheck.errors import InputFileError

FASTEN_S1 = Guidance("fasten", "s1", "Fasten.")
ONE_OF_EACH: list[Observation] = [
    ZoneObservation(1.0, 3, "s1", "s1", 0.7, 300.0, True, (12.5, 40.25), 12.0),
    ZoneObservation(1.1, 4, None, None, None, 0.0, False),
    UnitStarted(1.2, "U-1"),
    UnitStarted(1.3, "U-1", rework=True, rework_positions=(PositionRef("fasten", "s2"),)),
    ToolRunning(1.4, True),
    TighteningResult(1.5, False, 4.1, 22.5, 17),
    TighteningResult(1.6, True),
    OperatorAck(1.7),
    Reset(1.8, "shift start"),
    Abort(1.9, "part dropped"),
    Tick(2.0),
    BinActivity(2.1, "bin_a", True),
    CheckVerdict(2.2, "chk", "undecided", -0.2),
    CameraMoved(2.3, True, 9.5),
    PictureState(2.35, False, True, "too noisy"),
    LinkStatus(2.4, False),
    DetectorFault(2.5, "output was NaN"),
    FrameStale(2.6, 240.0),
    LinkEvent(2.7, "serial_refused", "serial has control characters"),
]


def test_every_observation_kind_is_covered() -> None:
    assert {o.kind for o in ONE_OF_EACH} == set(OBSERVATION_TYPES)


@pytest.mark.parametrize("observation", ONE_OF_EACH, ids=lambda o: o.kind)
def test_observation_json_round_trip(observation: Observation) -> None:
    text = json.dumps(observation_to_dict(observation))
    assert observation_from_dict(json.loads(text)) == observation
    assert observation.to_dict() == json.loads(text)


@pytest.mark.parametrize(
    ("raw", "message"),
    [
        ({"kind": "teleport", "t_s": 1.0}, "observation kind must be one of"),
        ({"kind": "tick"}, "tick observation is malformed"),
        ({"kind": "tick", "t_s": 1.0, "extra": 1}, r"unknown keys \['extra'\]"),
        (
            {"kind": "link_status", "t_s": 1.0, "ok": "yes"},
            "LinkStatus.ok must be true or false, got 'yes'",
        ),
        (
            {
                "kind": "unit_started",
                "t_s": 1.0,
                "serial": "U",
                "rework": True,
                "rework_positions": [{"step": "f"}],
            },
            "malformed",
        ),
        (
            {"kind": "check_verdict", "t_s": 1.0, "zone": "chk", "verdict": "maybe"},
            "verdict must be one of",
        ),
    ],
)
def test_malformed_observations_are_input_file_errors(raw: dict[str, Any], message: str) -> None:
    with pytest.raises(InputFileError, match=message):
        observation_from_dict(raw)


BAD_RECORDS: list[tuple[Callable[[], object], str]] = [
    (lambda: Tick(math.nan), "Tick.t_s must be a finite number, got nan"),
    (
        lambda: ZoneObservation(1.0, 0, "s1", "s2", 0.5, 0.0, True),
        "arrived_zone must be None or equal zone 's1', got 's2'",
    ),
    (
        lambda: ZoneObservation(1.0, 0, "s1", None, None, 0.0, True),
        "since_t_s must be set exactly when zone is set",
    ),
    (
        lambda: ZoneObservation(1.0, 0, "s1", None, 0.9, 0.0, False),
        "zone must be None when not visible, got 's1'",
    ),
    (
        lambda: ZoneObservation(1.0, -1, None, None, None, 0.0, False),
        "frame_index must be >= 0, got -1",
    ),
    (lambda: UnitStarted(1.0, ""), "UnitStarted.serial must be a non-empty string, got ''"),
    (
        lambda: UnitStarted(1.0, "U", rework_positions=(PositionRef("f", "s1"),)),
        "must be empty unless rework is true, got 1",
    ),
    (lambda: TighteningResult(1.0, True, math.inf), "torque_nm must be a finite number, got inf"),
    (
        lambda: TighteningResult(1.0, True, sequence=True),
        "sequence must be an int or None, got True",
    ),
    (
        lambda: CheckVerdict(1.0, "chk", "maybe"),  # type: ignore[arg-type]
        "verdict must be one of ['absent', 'present', 'undecided'], got 'maybe'",
    ),
    (lambda: CameraMoved(1.0, True, -2.0), "shift_px must be >= 0.0, got -2.0"),
    (lambda: Reset(1.0, " "), "Reset.reason must be a non-empty string"),
    (
        lambda: ToolPose(1.0, 0, None, None, True, True, 0.9),
        "tip_px must be set when visible is true, got None",
    ),
    (
        lambda: ToolPose(1.0, 0, (1.0, 2.0), None, False, True, 0.9),
        "visible must be true when seen is true, got false",
    ),
    (
        lambda: ToolPose(1.0, 0, (1.0, 2.0), None, True, True, 1.5),
        "score must be in [0, 1], got 1.5",
    ),
    (
        lambda: ToolPose(1.0, 0, (1.0, math.nan), None, True, True, 0.5),
        "tip_px[1] must be a finite number, got nan",
    ),
    (lambda: Event.from_data(1.0, "party", None, {}), "event kind must be one of"),
    (
        lambda: ev.StationReset(1.0, None, reason={1, 2}),  # type: ignore[arg-type]
        "StationReset.reason must be text, got {1, 2}",
    ),
    (
        lambda: ev.RunStarted(1.0, "U-1", step="f", zone="s1", position=True),
        "RunStarted.position must be a whole number, got True",
    ),
    (
        lambda: ev.UnitEnded(1.0, "U-1", "OK", True, "completed", "", False, (), (), 0.0, math.nan,
                             ()),
        "UnitEnded.cycle_time_s must be a finite number, got nan",
    ),
    (
        lambda: ev.StationReset(1.0, "", "jammed"),
        "StationReset.serial must be a non-empty string or None, got ''",
    ),
    (
        lambda: Guidance("dance", None, "x"),  # type: ignore[arg-type]
        "Guidance.kind must be one of",
    ),
    (
        lambda: Output(1.0, True, Guidance("fasten", "s1", "Fasten."), "running"),
        "target must be set when tool_enabled is true",
    ),
    (
        lambda: Output(1.0, False, FASTEN_S1, "busy"),  # type: ignore[arg-type]
        "unit_status must be one of",
    ),
]


@pytest.mark.parametrize(("build", "message"), BAD_RECORDS)
def test_bad_records_say_what_was_expected_and_what_came(
    build: Callable[[], object], message: str
) -> None:
    with pytest.raises(ValueError, match=re.escape(message)):
        build()


def test_good_records_construct() -> None:
    assert ToolPose(1.0, 0, (1.0, 2.0), None, True, False, 0.0, 0.5, 120.0).visible
    assert Output(
        1.0, True, Guidance("fasten", "s1", "Fasten."), "running", target=PositionRef("f", "s1")
    ).tool_enabled


def test_event_data_is_plain_json_and_round_trips() -> None:
    event = ev.UnitEnded(2.5, "U-1", result="NotOK", released=False, ended_by="completed",
                         reason="", rework=False, failed_positions=(PositionRef("f", "s2"),),
                         unfinished_positions=(), started_t_s=0.5, cycle_time_s=41.5, alarms=())
    assert event.to_data()["failed_positions"] == [{"step": "f", "zone": "s2"}]
    assert Event.from_dict(json.loads(json.dumps(event.to_dict()))) == event


@pytest.mark.parametrize(
    ("raw", "message"),
    [
        ({"t_s": 1.0, "kind": "station_reset", "serial": None}, "event keys must be"),
        (
            {"t_s": "soon", "kind": "station_reset", "serial": None, "data": {}},
            "event is malformed",
        ),
    ],
)
def test_malformed_events_are_input_file_errors(raw: dict[str, Any], message: str) -> None:
    with pytest.raises(InputFileError, match=message):
        Event.from_dict(raw)


def test_every_event_kind_has_a_description() -> None:
    assert all(cls.__doc__ and "Event(" not in cls.__doc__ for cls in EVENT_CLASSES.values())


def test_alarm_numbers_are_unique_and_conditions_are_the_cleared_ones(scenario: Any) -> None:
    numbers = [info.number for info in ALARMS.values()]
    # appended in rising order, never reused or renumbered
    assert numbers == sorted(set(numbers)) and min(numbers) >= 1
    sc = scenario().unit("U-1").camera(True).camera(False).link(False).link(True)
    run = sc.detector_fault().arrive("s2").stale().arrive("s1").hidden(400).run()
    cleared = {e.code for e in run.of("alarm_cleared")}
    assert cleared and all(ALARMS[code].condition for code in cleared)
    for raised in run.of("alarm_raised"):
        info = ALARMS[raised.code]
        assert (raised.number, raised.severity) == (info.number, info.severity)
