"""Each tightening attempt is granted on its own, an acknowledged failing check stops the unit,
activity in another bin must last before it is an alarm, and the log rows carry where they were."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.core.alarms import ALARMS
from stationcheck.core.plan import CheckStep, ConfirmStep, PickStep, StationPlan
from stationcheck.core.sequencer import Sequencer

Build = Callable[[Any], Any]
DWELL_MS = 200.0  # the default Thresholds.dwell_ms the scenarios run with

PICKS = (
    PickStep("take_a", "bin_a", min_time_ms=300.0),
    PickStep("take_b", "bin_b", min_time_ms=300.0),
)
CHECK_ONLY = (CheckStep("pin", "chk", expect="present"),)
CHECK_THEN_CONFIRM = (CheckStep("pin", "chk", expect="present"), ConfirmStep("done", "Put away"))


def after_nok(fasten_only: Any) -> Any:
    """Unit open, tip dwelled at s1, one NOK there; the tip has not moved since the result."""
    sc = fasten_only().unit("U-1").arrive("s1").running(True).wait(34)
    return sc.result(ok=False).running(False).mark("result")


# ---- each attempt gets its own enable ----------------------------------------------------


@pytest.mark.parametrize(
    ("then", "enabled", "reason"),
    [
        (lambda sc: sc, False, "new_attempt_dwell"),  # at the result itself
        (lambda sc: sc.wait(100), False, "new_attempt_dwell"),  # tip still, dwell not over
        (lambda sc: sc.wait(DWELL_MS - 34), False, "new_attempt_dwell"),  # one frame short
        (lambda sc: sc.redwell(), True, "tip_at_target"),  # tip still for a new dwell
        (lambda sc: sc.tip(None, 100).arrive("s1"), True, "tip_at_target"),  # left, came back
        (lambda sc: sc.tip(None, 50).tip("s1", 100), False, "dwelling"),  # back, not dwelled
        (lambda sc: sc.gap(400), False, "frame_stale"),  # time passes without frames
        (lambda sc: sc.reset().redwell(), True, "tip_at_target"),
        (lambda sc: sc.reset().wait(100), False, "reset_hold"),  # a reset's hold has its name
    ],
)
def test_a_nok_drops_enable_until_a_new_dwell(
    fasten_only: Any, then: Build, enabled: bool, reason: str
) -> None:
    run = then(after_nok(fasten_only)).run()
    assert not run.at("result").tool_enabled
    assert run.at("result").enable_reason == "new_attempt_dwell"
    assert (run.last.tool_enabled, run.last.enable_reason) == (enabled, reason)
    assert run.last.attempt == 2


def test_each_attempt_has_its_own_enable_edges(fasten_only: Any) -> None:
    run = after_nok(fasten_only).redwell().run_tightening(ok=True).run()
    edges = [
        (e.kind, e.to_data().get("zone"), e.to_data().get("attempt"), e.to_data().get("reason"))
        for e in run.events
        if e.kind in ("tool_enabled", "tool_inhibited")
    ]
    assert edges == [
        ("tool_enabled", "s1", 1, "tip_at_target"),
        ("tool_inhibited", "s1", None, "new_attempt_dwell"),
        ("tool_enabled", "s1", 2, "tip_at_target"),
        ("tool_inhibited", "s2", None, "tip_not_at_target"),
    ]
    result_t_s = run.of("tightening_result")[0].t_s
    second_enable_t_s = run.of("tool_enabled")[1].t_s
    assert (second_enable_t_s - result_t_s) * 1000.0 >= DWELL_MS - 1e-6
    assert [e.result for e in run.of("tightening_result")] == ["NotOK", "OK"]


def test_a_run_during_the_new_dwell_grants_nothing(fasten_only: Any) -> None:
    """Pulling the trigger at once after a NOK: the tool was off, the result does not count."""
    run = after_nok(fasten_only).running(True).wait(34).result(ok=True).running(False).run()
    assert run.raised() == ["ran_while_inhibited", "result_without_enable"]
    assert [e.attempt for e in run.of("tightening_result")] == [1]
    assert run.last.target is not None and run.last.target.zone == "s1"


def test_the_last_nok_moves_on_without_a_hold_at_the_next_position(fasten_only: Any) -> None:
    """After the attempts are used up the next position is granted after its own dwell."""
    sc = after_nok(fasten_only).redwell().run_tightening(ok=False).tip(None, 50).arrive("s2")
    run = sc.run()
    assert [e.zone for e in run.of("position_failed")] == ["s1"]
    assert (run.last.tool_enabled, run.last.target.zone) == (True, "s2")  # type: ignore[union-attr]


def test_a_restart_during_the_new_dwell_keeps_the_hold(fasten_only: Any) -> None:
    before = after_nok(fasten_only)
    first = before.run()
    sequencer = Sequencer(before.plan)
    restarted = sequencer.rebuild(first.events)
    assert restarted.control.hold_off_until_t_s == first.states[-1].control.hold_off_until_t_s
    assert restarted.control.hold_off_reason == "new_attempt_dwell"
    after = fasten_only()
    after.t_s = before.t_s
    run = after.arrive("s1").run(state=restarted)  # dwelled from the restart: hold is over
    assert run.last.tool_enabled
    early = fasten_only()
    early.t_s = before.t_s
    run = early.tip("s1", 67).run(state=restarted)
    assert (run.last.tool_enabled, run.last.enable_reason) == (False, "dwelling")


# ---- an acknowledge during a check ----------------------------------------------------------


@pytest.mark.parametrize(
    ("expect", "verdicts", "fails"),
    [
        ("present", (), True),  # no verdict yet
        ("present", ("absent",), True),
        ("present", ("undecided",), True),
        ("present", ("present", "absent"), False),  # passed at once; the ack meets no check
        ("present", ("absent", "present"), False),
        ("absent", ("present",), True),
        ("absent", ("absent",), False),
    ],
)
def test_acknowledging_a_check_that_has_not_passed_fails_the_unit(
    scenario: Any, expect: str, verdicts: tuple[str, ...], fails: bool
) -> None:
    steps = (CheckStep("pin", "chk", expect=expect),)  # type: ignore[arg-type]
    sc = scenario(steps).unit("U-1")
    for verdict in verdicts:
        sc.verdict("chk", verdict).wait(34)
    run = sc.ack().run()
    end = run.unit_end()
    assert (end.result, end.released) == (
        ("NotOK", False) if fails else ("OK", True)
    )
    assert ("check_failed" in run.raised()) is fails
    assert end.to_data()["failed_checks"] == ([{"step": "pin", "zone": "chk"}] if fails else [])
    assert run.last.unit_status == ("nok" if fails else "ok")
    step = run.of("step_completed")[0].to_data()
    assert (step["step"], step["zone"], step["expect"]) == ("pin", "chk", expect)
    assert step["result"] == ("NotOK" if fails else "OK")


def test_a_failed_check_ends_the_unit_before_its_later_steps(scenario: Any) -> None:
    run = scenario(CHECK_THEN_CONFIRM).unit("U-1").verdict("chk", "absent").ack().run()
    step = run.of("step_completed")
    assert [(e.step, e.result, e.ended_by) for e in step] == [
        ("pin", "NotOK", "check_failed")
    ]
    assert step[0].verdict == "absent"
    end = run.unit_end()
    assert (end.ended_by, end.reason) == ("check_failed", "check pin failed")
    raised = run.of("alarm_raised")[0].to_data()
    assert (raised["code"], raised["number"], raised["subject"]) == ("check_failed", 17, "chk")
    assert end.to_data()["alarms"] == ["check_failed"]
    assert not any(o.tool_enabled for o in run.outputs)
    assert run.last.guidance.words == "Unit U-1 not released: the check at chk label failed."


def test_an_acknowledge_while_the_camera_is_moved_and_the_check_looks_right_is_ignored(
    scenario: Any,
) -> None:
    """The verdict cannot pass (zones misplaced) and cannot be called failed either: the unit
    stays open, and inhibited, until the camera is set up again."""
    run = scenario(CHECK_ONLY).unit("U-1").camera(True).verdict("chk", "present").ack().run()
    assert run.of("unit_ended") == [] and "check_failed" not in run.raised()
    assert run.last.step_id == "pin"


def test_an_acknowledge_in_other_phases_changes_nothing(scenario: Any) -> None:
    run = scenario().ack().unit("U-1").ack().pick().ack().run()
    assert "check_failed" not in run.raised()
    assert run.of("unit_ended") == []


def test_alarm_numbers_already_given_stay(scenario: Any) -> None:
    """Numbers go to the PLC's alarm register: new codes come after the existing ones."""
    assert ALARMS["run_without_result"].number == 16
    assert ALARMS["check_failed"].number == 17
    assert (ALARMS["check_failed"].severity, ALARMS["check_failed"].condition) == ("alarm", False)


# ---- activity in another bin ----------------------------------------------------------------


@pytest.mark.parametrize(
    ("activity", "alarm"),
    [
        (lambda sc: sc.bin("bin_b", True).wait(334), True),
        (lambda sc: sc.bin("bin_b", True).wait(200), False),  # shorter than min_time_ms
        (lambda sc: sc.bin("bin_b", True).wait(34).bin("bin_b", False).pick("bin_a"), False),
        (lambda sc: sc.pick("bin_b", 200).pick("bin_b", 200), False),  # two short reaches
        (lambda sc: sc.bin("bin_b", True).gap(350), True),  # the timer runs on ticks too
        (lambda sc: sc.camera(True).bin("bin_b", True).wait(600), False),  # zones misplaced
    ],
)
def test_wrong_bin_needs_the_picks_minimum_time(scenario: Any, activity: Build, alarm: bool) -> None:
    run = activity(scenario(PICKS).unit("U-1")).run()
    assert ("wrong_bin" in run.raised()) is alarm


@pytest.mark.parametrize(("wait_ms", "alarm"), [(200.0, False), (334.0, True)])
def test_wrong_bin_activity_from_before_the_step_counts_from_the_step_start(
    scenario: Any, wait_ms: float, alarm: bool
) -> None:
    run = scenario(PICKS).bin("bin_b", True).wait(1000).unit("U-1").wait(wait_ms).run()
    assert ("wrong_bin" in run.raised()) is alarm


# ---- where the log rows are -------------------------------------------------------------------


@pytest.mark.parametrize("station", ["", "Line 2 demo station"])
def test_unit_started_names_the_station(scenario: Any, station: str) -> None:
    plan = scenario(CHECK_ONLY).plan
    named = StationPlan(plan.zones, plan.steps, plan.thresholds, station=station)
    sc = scenario(CHECK_ONLY).unit("U-1")
    sc.plan = named
    run = sc.run()
    assert run.of("unit_started")[0].station == station
