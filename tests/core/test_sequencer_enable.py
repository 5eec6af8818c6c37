"""Enable/inhibit rules: start inhibited, enable only at the target after dwell with a fresh
frame and a visible tip, drop on faults at once, even during a running tightening."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from typing import Any

import pytest

from stationcheck.core.observations import ZoneObservation

Build = Callable[[Any], Any]


def test_starts_inhibited_and_stays_so_without_a_unit(scenario: Any) -> None:
    run = scenario().arrive("s1").run()
    assert not any(run.enabled())
    assert run.last.enable_reason == "no_unit"
    assert run.last.guidance.kind == "wait_for_unit"


@pytest.mark.parametrize(
    ("steps", "enabled", "reason"),
    [
        (lambda sc: sc.tip("s1", 100), False, "dwelling"),
        (lambda sc: sc.arrive("s1"), True, "tip_at_target"),
        (lambda sc: sc.arrive("s2"), False, "tip_not_at_target"),
        (lambda sc: sc.tip(None, 300), False, "tip_not_at_target"),
        (lambda sc: sc.hidden(300), False, "tool_not_visible"),
        (lambda sc: sc.arrive("s1").tip(None, 34), False, "tip_not_at_target"),
        (lambda sc: sc.arrive("s1").wait(500), True, "tip_at_target"),
        (lambda sc: sc.arrive("s1").gap(50), True, "tip_at_target"),
        (lambda sc: sc.arrive("s1").gap(150), False, "frame_stale"),
        (lambda sc: sc.arrive("s1").stale(), False, "frame_stale"),
        (lambda sc: sc.arrive("s1").detector_fault(), False, "detector_fault"),
        (lambda sc: sc.arrive("s1").link(False), False, "link_lost"),
        (lambda sc: sc.arrive("s1").camera(True), False, "camera_moved"),
        (lambda sc: sc.arrive("s1").reset(), False, "reset_hold"),
        (lambda sc: sc.arrive("s1").abort(), False, "no_unit"),
        (lambda sc: sc.arrive("s1").camera(True).camera(False).wait(34), True, "tip_at_target"),
        (lambda sc: sc.arrive("s1").link(False).link(True).wait(34), True, "tip_at_target"),
        (lambda sc: sc.arrive("s1").detector_fault().wait(34), True, "tip_at_target"),
        (lambda sc: sc.arrive("s1").reset().wait(100), False, "reset_hold"),
        (lambda sc: sc.arrive("s1").reset().wait(234), True, "tip_at_target"),
    ],
)
def test_enable_follows_the_tip_and_the_station_health(
    fasten_only: Any, steps: Build, enabled: bool, reason: str
) -> None:
    sc = fasten_only().unit("U-1")
    run = steps(sc).run()
    assert run.last.tool_enabled is enabled
    assert run.last.enable_reason == reason


# The fault table of a running tightening (README "Faults during a tightening"): every fault
# drops the enable at once; only the tip wobbling inside the zone's hysteresis and an occlusion
# shorter than the lost-track grace (the tracker keeps the tip visible) let the run go on.
@pytest.mark.parametrize(
    ("during_run", "enabled", "cut_by", "reason"),
    [
        (lambda sc: sc.wait(1000), True, None, "tightening_running"),
        (lambda sc: sc.tip(None, 200), False, "tip_left_during_run", "tip_not_at_target"),
        (lambda sc: sc.tip("s2", 400), False, "tip_left_during_run", "tip_not_at_target"),
        (lambda sc: sc.hidden(500), False, "tool_not_visible", "tool_not_visible"),
        (lambda sc: sc.stale(), False, "frame_stale", "frame_stale"),
        (lambda sc: sc.gap(500), False, "frame_stale", "frame_stale"),
        (lambda sc: sc.detector_fault(), False, "detector_fault", "detector_fault"),
        (lambda sc: sc.detector_fault().wait(100), False, "detector_fault", "detector_fault"),
        (lambda sc: sc.camera(True), False, "camera_moved", "camera_moved"),
        (lambda sc: sc.link(False), False, "link_lost", "link_lost"),
        (lambda sc: sc.link(False).link(True).tip(None, 34), False, "link_lost",
         "tip_not_at_target"),
        (lambda sc: sc.reset(), False, "reset_hold", "reset_hold"),
        (lambda sc: sc.abort(), False, "no_unit", "no_unit"),
        (lambda sc: sc.tip(None, 100).running(False), False, "tip_left_during_run",
         "tip_not_at_target"),
        (lambda sc: sc.result(ok=True), False, "tip_not_at_target", "tip_not_at_target"),
    ],
)
def test_a_fault_during_a_running_tightening_drops_the_enable_at_once(
    fasten_only: Any, during_run: Build, enabled: bool, cut_by: str | None, reason: str
) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").running(True)
    before = len(sc.observations)
    run = during_run(sc).run()
    assert run.last.tool_enabled is enabled
    assert run.last.enable_reason == reason
    drops = [e.reason for batch in run.events_per_step[before:] for e in batch
             if e.kind == "tool_inhibited"]
    assert drops[:1] == ([cut_by] if cut_by is not None else [])


def test_the_enable_stays_off_while_a_cut_run_goes_on(fasten_only: Any) -> None:
    """The fault clears but the tool still runs: no enable until it stops and the tip dwells."""
    sc = fasten_only().unit("U-1").arrive("s1").running(True).detector_fault().wait(300)
    sc.mark("still running").running(False).redwell()
    run = sc.run()
    assert run.at("still running").enable_reason == "detector_fault"
    assert not run.at("still running").tool_enabled
    assert run.last.tool_enabled


def test_a_run_past_its_limit_drops_the_enable_and_flags_the_result(fasten_only: Any) -> None:
    sc = fasten_only(max_run_ms=1000.0).unit("U-1").arrive("s1").running(True)
    sc.wait(900).mark("in time").wait(200).mark("too long")
    run = sc.result(ok=True).running(False).run()
    assert run.at("in time").tool_enabled
    assert not run.at("too long").tool_enabled
    assert run.at("too long").enable_reason == "run_too_long"
    assert "run_too_long" in run.at("too long").alarms
    (alarm,) = [e for e in run.events if e.kind == "alarm_raised"
                and e.code == "run_too_long"]
    assert alarm.subject == "s1" and "s1 label" in alarm.message
    (result,) = run.of("tightening_result")
    assert result.run_cut == "run_too_long"
    assert "result_of_cut_run" in run.raised()
    assert "run_too_long" not in run.last.alarms  # cleared once the tool stopped


def test_the_station_run_limit_applies_without_a_step_override(scenario: Any) -> None:
    sc = scenario(max_run_ms=500.0).unit("U-1").tip(None, 50).pick().arrive("s1").running(True)
    run = sc.wait(600).run()
    assert run.last.enable_reason == "run_too_long"


def test_a_frozen_picture_inhibits_with_its_own_alarm(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s1")
    frame = sc.observations[-1]
    assert isinstance(frame, ZoneObservation)
    for frozen_ms, name in ((66.7, "young"), (100.0, "frozen")):
        sc.add(replace(frame, t_s=sc.t_s + frozen_ms / 1000, frozen_ms=frozen_ms)).mark(name)
    run = sc.wait(100).run()
    assert run.at("young").tool_enabled
    assert not run.at("frozen").tool_enabled
    assert run.at("frozen").enable_reason == "image_frozen"
    assert "image_frozen" in run.at("frozen").alarms
    assert "frame_stale" not in run.at("frozen").alarms
    assert "image_frozen" not in run.last.alarms


def test_running_while_inhibited_is_an_alarm_and_grants_nothing(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").tip(None, 100).running(True).tip("s2", 300).run()
    assert "ran_while_inhibited" in run.raised()
    assert not any(run.enabled())


def test_every_enable_edge_is_an_event_with_its_reason(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").tip(None, 100).arrive("s1").run()
    edges = [(e.kind, e.to_data().get("reason")) for e in run.events if e.kind.startswith("tool_")]
    assert edges == [
        ("tool_enabled", "tip_at_target"),
        ("tool_inhibited", "tip_not_at_target"),
        ("tool_enabled", "tip_at_target"),
    ]
    enabled = run.of("tool_enabled")[0].to_data()
    assert (enabled["zone"], enabled["position"], enabled["attempt"]) == ("s1", 1, 1)
