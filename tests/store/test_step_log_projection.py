"""Units, steps and alarms derived from the real sequencer's events, in both logs."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import Event
from stationcheck.core.progress import rebuild_unit
from stationcheck.store import StepLog
from stationcheck.store.synthetic import POSITIONS, StationScript
from tests.event_examples import tightening, unit_ended, unit_started

Logged = Callable[[StationScript], StepLog]


def clean() -> StationScript:
    return StationScript().unit("PC-1", {})


def retry() -> StationScript:
    return StationScript().unit("PC-2", {"p5": 1})


def reworked() -> StationScript:
    return StationScript().unit("PC-3", {"p3": 2}).frames(None, 1000).unit("PC-3", {}, ("p3",))


def scrapped() -> StationScript:
    return StationScript().unit("PC-4", {"p2": 2})


def aborted() -> StationScript:
    return StationScript().start("PC-5").frames(None, 100).pick("bin_gasket").abort("taken off")


def pin_missing() -> StationScript:
    script = StationScript().start("PC-6").frames(None, 100).pick("bin_gasket").pick("bin_cover")
    return script.fasten(POSITIONS, {}).verdict("absent").frames(None, 500).abort("no pin")


def still_open() -> StationScript:
    script = StationScript().start("PC-7").frames(None, 100).pick("bin_gasket").pick("bin_cover")
    return script.fasten(POSITIONS[:2], {})


# (script, serial, expected unit fields, expected (kind, position, pass, attempt, result) rows)
STORIES: list[tuple[Callable[[], StationScript], str, dict[str, Any], int]] = [
    (clean, "PC-1", {"status": "OK", "passes": 1, "first_result": "OK", "first_time_through": True,
                         "retries": 0, "nok_results": 0, "released": True, "failed_positions": ()}, 9),
    (retry, "PC-2", {"status": "OK", "passes": 1, "first_time_through": False, "retries": 1,
                         "nok_results": 1, "released": True, "failed_positions": ()}, 10),
    (reworked, "PC-3", {"status": "OK", "passes": 2, "first_result": "NotOK", "reworked": True,
                            "first_time_through": False, "retries": 1, "nok_results": 2, "released": True,
                            "failed_positions": ("p3",)}, 12),
    (scrapped, "PC-4", {"status": "NotOK", "passes": 1, "first_result": "NotOK", "released": False,
                            "failed_positions": ("p2",), "ended_by": "completed"}, 10),
    (aborted, "PC-5", {"status": "NotDecidable", "ended_by": "abort", "released": False,
                           "unfinished_positions": POSITIONS}, 2),
    (pin_missing, "PC-6", {"status": "NotDecidable", "ended_by": "abort", "released": False,
                               "unfinished_positions": ()}, 9),
    (still_open, "PC-7", {"status": "open", "current_step": "cover_screws", "ended_t_s": None,
                              "result": None}, 4),
]


@pytest.mark.parametrize(("script", "serial", "expected", "step_rows"), STORIES,
                         ids=[s[1] for s in STORIES])
def test_unit_row_follows_the_story(
    logged: Logged, script: Callable[[], StationScript], serial: str, expected: dict[str, Any],
    step_rows: int,
) -> None:
    log = logged(script())
    unit = log.unit(serial)
    assert unit is not None
    assert {name: getattr(unit, name) for name in expected} == expected
    assert len(log.steps(serial)) == step_rows
    assert log.units().total == 1


def test_attempts_carry_values_limits_and_the_deciding_result(logged: Logged) -> None:
    steps = logged(reworked()).steps("PC-3")
    p3 = [(s.pass_no, s.attempt, s.result, s.position_result) for s in steps if s.position == "p3"]
    # two NOK attempts use up the first pass; the rework pass tightens only p3, once, OK
    assert p3 == [(1, 1, "NotOK", None), (1, 2, "NotOK", "NotOK"), (2, 1, "OK", "OK")]
    first = next(s for s in steps if s.position == "p3")
    assert (first.torque_nm, first.torque_low_nm, first.torque_high_nm) == (7.0, 9.0, 11.0)
    assert (first.angle_deg, first.angle_low_deg, first.angle_high_deg) == (40.0, 20.0, 60.0)
    assert first.within_limits is False and first.max_attempts == 2
    assert first.started_t_s is not None and first.started_t_s < first.ended_t_s
    rework_pass = [s.position or s.step for s in steps if s.is_rework]
    assert rework_pass == ["p3", "pin"]  # the check row is placed at its zone
    assert [s.ended_t_s for s in steps] == sorted(s.ended_t_s for s in steps)


def test_fasten_order_and_pick_and_check_rows(logged: Logged) -> None:
    steps = logged(clean()).steps("PC-1")
    assert [(s.kind, s.position) for s in steps] == (
        [("pick", "bin_gasket"), ("pick", "bin_cover")]
        + [("fasten", z) for z in POSITIONS]
        + [("check", "pin")]
    )
    assert steps[-1].detail["verdict"] == "present"
    assert steps[-1].detail["expect"] == "present"
    assert [s.position_number for s in steps if s.kind == "fasten"] == [1, 2, 3, 4, 5, 6]


def test_aborted_check_is_not_decidable(logged: Logged) -> None:
    check = logged(pin_missing()).steps("PC-6")[-1]
    assert (check.kind, check.result, check.detail["ended_by"]) == ("check", "NotDecidable",
                                                                     "abort")


def test_wrong_position_alarm_is_raised_and_cleared(logged: Logged) -> None:
    script = StationScript().start("PC-8").frames(None, 100).pick("bin_gasket").pick("bin_cover")
    script.frames("p4", 500).fasten(POSITIONS, {}).verdict("present")
    log = logged(script)
    (alarm,) = log.alarms("PC-8")
    assert (alarm.code, alarm.subject, alarm.detail["expected"]) == ("wrong_position", "p4", "p1")
    assert alarm.cleared_t_s is not None and alarm.cleared_t_s > alarm.t_s
    unit = log.unit("PC-8")
    assert unit is not None and unit.alarm_count == 1


def test_open_unit_is_the_sequencers_unit(logged: Logged) -> None:
    log = logged(still_open())
    unit = log.open_unit()
    assert unit is not None and unit.serial == "PC-7" and unit.is_open
    assert unit == rebuild_unit(stored.event for stored in log.events())
    assert [p.result for p in unit.positions] == ["OK", "OK", None, None, None, None]


def test_closed_log_has_no_open_unit(logged: Logged) -> None:
    log = logged(clean())
    assert log.open_unit() is None and log.open_unit_events() == ()


# hand-made events: odd values still give a row that says what is known
ODD_EVENTS: list[tuple[str, list[Event], dict[str, Any]]] = [
    ("values and limits", [
        unit_started(1.0, "X-1"),
        tightening(2.0, "X-1", torque=ev.Measured(5.0, 4.0, 6.0, "N·m"),
                   angle=ev.Measured(30.0, 10.0, 50.0, "deg")),
    ], {"torque_nm": 5.0, "torque_high_nm": 6.0, "angle_low_deg": 10.0, "result": "OK"}),
    ("no values, no limits", [
        unit_started(1.0, "X-1"),
        tightening(2.0, "X-1", result="NotOK", torque=ev.Measured(None, None, None, "N·m"),
                   angle=ev.Measured(12.0, None, None, "deg")),
    ], {"torque_nm": None, "torque_low_nm": None, "angle_deg": 12.0, "result": "NotOK",
        "attempt": 1}),
    ("times at zero are times", [
        tightening(2.0, "X-1", started_t_s=0.0, ended_t_s=0.0),
    ], {"started_t_s": 0.0, "ended_t_s": 0.0}),
    ("unknown result word", [
        tightening(2.0, "X-1", result="maybe"),
    ], {"result": "NotDecidable", "torque_nm": 5.1, "pass_no": 1}),
]


@pytest.mark.parametrize(("events", "expected"), [(e, x) for _, e, x in ODD_EVENTS],
                         ids=[name for name, _, _ in ODD_EVENTS])
def test_projection_of_odd_values(
    any_log: StepLog, events: list[Event], expected: dict[str, Any]
) -> None:
    any_log.append(events, 100.0)
    (step,) = any_log.steps("X-1")
    assert {name: getattr(step, name) for name in expected} == expected
    assert any_log.unit("X-1") is not None


@pytest.mark.parametrize("bad", [("not an event",), (None,)])
def test_append_refuses_what_is_not_an_event(any_log: StepLog, bad: tuple[object]) -> None:
    with pytest.raises(TypeError, match="Event records"):
        any_log.append(bad, 100.0)  # type: ignore[arg-type]
    assert any_log.events() == ()


def test_append_refuses_a_non_finite_wall_clock(any_log: StepLog) -> None:
    with pytest.raises(ValueError, match="recorded_at_s"):
        any_log.append([unit_started(1.0, "X-1")], float("nan"))


def test_rework_pass_of_a_unit_the_log_never_saw(any_log: StepLog) -> None:
    """E.g. its first pass was on another station's log: reworked, never first-time-through."""
    any_log.append([
        unit_started(1.0, "X-9", rework=True),
        unit_ended(5.0, "X-9", started_t_s=1.0),
    ], 100.0)
    unit = any_log.unit("X-9")
    assert unit is not None
    assert (unit.status, unit.passes, unit.reworked, unit.first_time_through) == ("OK", 1, True,
                                                                                 False)
    assert unit.cycle_time_s == 4.0
