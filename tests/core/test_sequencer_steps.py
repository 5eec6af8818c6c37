"""Pick, check and confirm steps, and a whole unit through every step kind."""

from __future__ import annotations

from typing import Any

import pytest

from stationcheck.core.plan import CheckStep, ConfirmStep, PickStep

PICKS = (
    PickStep("take_a", "bin_a", min_time_ms=300.0),
    PickStep("take_b", "bin_b", min_time_ms=300.0),
)
CHECK_ONLY = (CheckStep("pin", "chk", expect="present"),)


@pytest.mark.parametrize(
    ("activity", "done"),
    [
        (lambda sc: sc.pick("bin_a", 400), True),
        (lambda sc: sc.pick("bin_a", 200), False),
        (lambda sc: sc.pick("bin_a", 200).pick("bin_a", 200), False),  # two short reaches
        (lambda sc: sc.pick("bin_b", 600), False),
        (lambda sc: sc.pick("chk", 600), False),
        (lambda sc: sc.bin("bin_a", True).gap(350), True),  # the timer runs on ticks too
        (lambda sc: sc.camera(True).pick("bin_a", 600), False),  # zones misplaced: no pick
    ],
)
def test_pick_needs_activity_in_its_bin_for_the_minimum_time(
    scenario: Any, activity: Any, done: bool
) -> None:
    run = activity(scenario(PICKS).unit("U-1")).run()
    completed = [e.step for e in run.of("step_completed")]
    assert completed == (["take_a"] if done else [])


def test_activity_before_the_step_counts_from_the_step_start(scenario: Any) -> None:
    sc = scenario(PICKS).bin("bin_a", True).wait(1000).unit("U-1").wait(200).mark("early")
    run = sc.wait(134).run()
    assert run.at("early").step_id == "take_a"
    assert run.last.step_id == "take_b"
    assert run.of("step_completed")[0].active_ms >= 300.0


def test_activity_in_another_bin_is_a_wrong_bin_alarm_once(scenario: Any) -> None:
    sc = scenario(PICKS).unit("U-1").bin("bin_b", True).wait(1000).mark("wrong")
    run = sc.bin("bin_b", False).wait(34).pick("bin_a").run()
    raised = run.of("alarm_raised")
    assert [(e.code, e.subject, e.expected) for e in raised] == [
        ("wrong_bin", "bin_b", "bin_a")
    ]
    guidance = run.at("wrong").guidance
    assert (guidance.kind, guidance.target) == ("wrong_bin", "bin_a")
    assert [e.step for e in run.of("step_completed")] == ["take_a"]


@pytest.mark.parametrize(
    ("verdicts", "released"),
    [
        (("present",), True),
        (("absent",), False),
        (("undecided",), False),
        (("absent", "undecided", "present"), True),
        (("undecided", "undecided"), False),
    ],
)
def test_check_releases_only_on_the_expected_verdict(
    scenario: Any, verdicts: tuple[str, ...], released: bool
) -> None:
    sc = scenario(CHECK_ONLY).unit("U-1")
    for verdict in verdicts:
        sc.verdict("chk", verdict).wait(34)
    run = sc.run()
    assert bool(run.of("unit_ended")) is released
    assert run.last.unit_status == ("ok" if released else "running")
    changes = [e.verdict for e in run.of("check_verdict")]
    assert changes == [v for i, v in enumerate(verdicts) if i == 0 or verdicts[i - 1] != v]


def test_check_verdict_must_hold_when_the_step_is_current(scenario: Any) -> None:
    run = scenario().unit("U-1").verdict("chk", "present").pick().fasten_all().tip(None, 100).run()
    assert run.last.step_id == "pin"
    assert run.last.guidance.kind == "check"


@pytest.mark.parametrize(
    ("expect", "verdict", "released"),
    [("absent", "absent", True), ("absent", "present", False), ("present", "absent", False)],
)
def test_check_can_expect_absence(scenario: Any, expect: str, verdict: str, released: bool) -> None:
    run = (
        scenario((CheckStep("clear", "chk", expect=expect),))  # type: ignore[arg-type]
        .unit("U-1")
        .verdict("chk", verdict)
        .run()
    )
    assert bool(run.of("unit_ended")) is released


def test_check_for_another_zone_or_while_the_camera_is_moved_does_not_pass(scenario: Any) -> None:
    run = (
        scenario(CHECK_ONLY)
        .unit("U-1")
        .verdict("bin_a", "present")
        .camera(True)
        .verdict("chk", "present")
        .run()
    )
    assert run.of("unit_ended") == []
    assert run.last.guidance.words == "Tool off: the camera has moved; call setup to check it."


def test_check_guidance_says_what_is_seen(scenario: Any) -> None:
    run = scenario(CHECK_ONLY).unit("U-1").verdict("chk", "absent").run()
    assert run.last.guidance.words == "Make sure chk label is present. Seen now: absent."


def test_confirm_step_completes_on_acknowledge_only(scenario: Any) -> None:
    steps = (ConfirmStep("label", "Stick the label on the cover."),)
    sc = scenario(steps).ack().unit("U-1").mark("open")
    run = sc.tip(None, 100).ack().run()
    assert run.at("open").guidance.words == "Stick the label on the cover. Then acknowledge."
    assert run.at("open").guidance.kind == "acknowledge"
    assert run.unit_end().result == "OK"


def test_acknowledge_outside_a_confirm_step_changes_nothing(scenario: Any) -> None:
    run = scenario().unit("U-1").ack().pick().ack().run()
    assert run.last.step_id == "fasten"
    assert [e.step for e in run.of("step_completed")] == ["take_a"]


def test_a_full_unit_walks_every_step_and_is_released(scenario: Any) -> None:
    run = scenario().full_unit("U-7").run()
    steps = [(e.step, e.result) for e in run.of("step_completed")]
    assert steps == [("take_a", "OK"), ("fasten", "OK"), ("pin", "OK"), ("done", "OK")]
    end = run.unit_end()
    assert end.serial == "U-7"
    assert (end.result, end.released, end.rework) == ("OK", True, False)
    assert end.cycle_time_s == pytest.approx(end.t_s - end.started_t_s)
    assert run.last.guidance.words == "Unit U-7 done: OK. Waiting for the next unit."
    for event in run.of("step_completed"):
        assert event.started_t_s <= event.t_s


def test_a_hand_still_in_the_previous_bin_is_not_a_wrong_bin(scenario: Any) -> None:
    """take_a completes while the hand is still in bin_a; take_b starts; no wrong_bin alarm.
    A new reach into bin_a during take_b is one once it lasts take_b's min_time_ms."""
    sc = scenario(PICKS).unit("U-1").bin("bin_a", True).wait(500).mark("still_in_a")
    run = sc.bin("bin_a", False).wait(100).bin("bin_a", True).wait(334).run()
    assert run.at("still_in_a").step_id == "take_b"
    assert "wrong_bin" not in run.at("still_in_a").alarms
    assert run.raised() == ["wrong_bin"]
