"""Enable/inhibit rules: start inhibited, enable only at the target after dwell with a fresh
frame and a visible tip, drop on faults, keep a running tightening whole."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

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


@pytest.mark.parametrize(
    ("during_run", "enabled", "reason"),
    [
        (lambda sc: sc.tip(None, 200), True, "tightening_running"),
        (lambda sc: sc.tip("s2", 400), True, "tightening_running"),
        (lambda sc: sc.hidden(500), True, "tightening_running"),
        (lambda sc: sc.stale(), True, "tightening_running"),
        (lambda sc: sc.gap(500), True, "tightening_running"),
        (lambda sc: sc.detector_fault(), True, "tightening_running"),
        (lambda sc: sc.camera(True), True, "tightening_running"),
        (lambda sc: sc.link(False), False, "link_lost"),
        (lambda sc: sc.link(False).link(True).tip(None, 34), False, "tip_not_at_target"),
        (lambda sc: sc.reset(), False, "reset_hold"),
        (lambda sc: sc.abort(), False, "no_unit"),
        (lambda sc: sc.tip(None, 100).running(False), False, "tip_not_at_target"),
        (lambda sc: sc.tip(None, 100).result(ok=False), False, "tip_not_at_target"),
        (lambda sc: sc.result(ok=True), False, "tip_not_at_target"),
    ],
)
def test_a_running_tightening_keeps_enable_until_its_result(
    fasten_only: Any, during_run: Build, enabled: bool, reason: str
) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").running(True)
    run = during_run(sc).run()
    assert run.last.tool_enabled is enabled
    assert run.last.enable_reason == reason


def test_running_while_inhibited_is_an_alarm_and_grants_nothing(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").tip(None, 100).running(True).tip("s2", 300).run()
    assert "ran_while_inhibited" in run.raised()
    assert not any(run.enabled())


def test_every_enable_edge_is_an_event_with_its_reason(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").tip(None, 100).arrive("s1").run()
    edges = [(e.kind, e.data.get("reason")) for e in run.events if e.kind.startswith("tool_")]
    assert edges == [
        ("tool_enabled", "tip_at_target"),
        ("tool_inhibited", "tip_not_at_target"),
        ("tool_enabled", "tip_at_target"),
    ]
    enabled = run.of("tool_enabled")[0].data
    assert (enabled["zone"], enabled["position"], enabled["attempt"]) == ("s1", 1, 1)
