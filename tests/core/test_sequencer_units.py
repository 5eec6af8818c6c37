"""Units: rework passes, a serial while a unit is open, abort, reset, station alarms."""

from __future__ import annotations

from typing import Any

import pytest


def failed_s2_then_rework(scenario: Any) -> Any:
    """U-1 fails position s2 (two NOKs) on its first pass, then comes back for rework."""
    sc = scenario().unit("U-1").pick().arrive("s1").run_tightening(ok=True)
    sc.arrive("s2").run_tightening(ok=False).run_tightening(ok=False)
    sc.arrive("s3").run_tightening(ok=True).tip(None, 50).verdict("chk", "present").ack()
    return sc.tip(None, 200).unit("U-1", rework=True, positions=("s2",)).mark("rework_open")


def test_rework_pass_enables_only_the_failed_positions(scenario: Any) -> None:
    sc = failed_s2_then_rework(scenario)
    sc.arrive("s1").mark("at_s1").arrive("s3").mark("at_s3").arrive("s2").mark("at_s2")
    run = sc.run_tightening(ok=True).tip(None, 50).verdict("chk", "present").run()
    assert not run.at("at_s1").tool_enabled and not run.at("at_s3").tool_enabled
    assert run.at("at_s2").tool_enabled
    opened = run.at("rework_open")
    assert (opened.rework, opened.step_id, opened.guidance.kind) == (True, "fasten", "rework")
    assert opened.guidance.words == "Rework s2 label (order 2 of 3, attempt 1 of 2)."
    first, second = run.of("unit_ended")
    assert first.to_data()["failed_positions"] == [{"step": "fasten", "zone": "s2"}]
    assert (second.result, second.rework, second.released) == (
        "OK",
        True,
        True,
    )


def test_rework_attempts_are_recorded_against_the_original_position(scenario: Any) -> None:
    sc = failed_s2_then_rework(scenario)
    run = sc.arrive("s2").run_tightening(ok=False).run_tightening(ok=True).run()
    rework_results = [e.to_data() for e in run.of("tightening_result") if e.rework]
    assert [
        (d["step"], d["zone"], d["position"], d["attempt"], d["result"]) for d in rework_results
    ] == [
        ("fasten", "s2", 2, 1, "NotOK"),
        ("fasten", "s2", 2, 2, "OK"),
    ]


def test_rework_pass_keeps_checks_and_drops_picks_and_confirms(scenario: Any) -> None:
    run = failed_s2_then_rework(scenario).run()
    starts = run.of("unit_started")
    assert [s["id"] for s in starts[1].to_data()["steps"]] == ["fasten", "pin"]
    assert starts[1].to_data()["positions"] == [{"step": "fasten", "zone": "s2", "number": 2}]
    assert starts[1].to_data()["rework_positions"] == [{"step": "fasten", "zone": "s2"}]


@pytest.mark.parametrize(
    ("positions", "alarms", "opened"),
    [
        ((), ["rework_nothing_to_do"], False),
        (("s9",), ["unknown_rework_position", "rework_nothing_to_do"], False),
        (("s9", "s3"), ["unknown_rework_position"], True),
    ],
)
def test_rework_without_known_positions_opens_nothing(
    fasten_only: Any, positions: tuple[str, ...], alarms: list[str], opened: bool
) -> None:
    run = fasten_only().unit("U-1", rework=True, positions=positions).arrive("s3").run()
    assert run.raised() == alarms
    assert [e.serial for e in run.of("alarm_raised")] == [("U-1" if opened else None)] * len(alarms)
    assert bool(run.of("unit_started")) is opened
    assert any(run.enabled()) is opened


def test_a_new_serial_while_a_unit_is_open_ends_it_unreleased(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True).unit("U-2").run()
    assert run.raised() == ["unit_interrupted"]
    ended = run.unit_end()
    assert ended.serial == "U-1"
    assert (ended.result, ended.ended_by, ended.released) == (
        "NotDecidable",
        "new_unit",
        False,
    )
    assert ended.to_data()["unfinished_positions"] == [
        {"step": "fasten", "zone": "s2"},
        {"step": "fasten", "zone": "s3"},
    ]
    assert run.of("unit_started")[-1].serial == "U-2"
    assert (run.last.serial, run.last.unit_status) == ("U-2", "running")
    assert run.last.target is not None and run.last.target.zone == "s1"


def test_the_same_serial_again_is_a_repeat_not_a_new_unit(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True).unit("U-1").run()
    assert run.raised() == ["unit_already_open"]
    assert len(run.of("unit_started")) == 1
    assert run.last.target is not None and run.last.target.zone == "s2"


def test_abort_ends_the_unit_with_its_reason(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").abort("part dropped").run()
    ended = run.unit_end().to_data()
    assert (ended["result"], ended["ended_by"], ended["reason"]) == (
        "NotDecidable",
        "abort",
        "part dropped",
    )
    assert run.of("step_completed")[-1].result == "NotDecidable"
    assert run.last.unit_status == "aborted" and not run.last.tool_enabled


def test_abort_without_a_unit_does_nothing(fasten_only: Any) -> None:
    run = fasten_only().abort("nothing here").run()
    assert run.events == []


def test_reset_is_logged_and_keeps_the_unit_where_it_was(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True).reset("jammed tool").run()
    (reset,) = run.of("station_reset")
    assert (reset.serial, reset.reason) == ("U-1", "jammed tool")
    assert run.last.target is not None and run.last.target.zone == "s2"


@pytest.mark.parametrize(
    ("fault", "code"),
    [
        (lambda sc: sc.camera(True), "camera_moved"),
        (lambda sc: sc.link(False), "link_lost"),
        (lambda sc: sc.detector_fault(), "detector_fault"),
        (lambda sc: sc.stale(), "frame_stale"),
    ],
)
def test_station_faults_inhibit_and_alarm_once(fasten_only: Any, fault: Any, code: str) -> None:
    sc = fasten_only().unit("U-1").arrive("s1")
    run = fault(fault(sc)).mark("faulted").run()
    assert run.raised() == [code]
    assert not run.at("faulted").tool_enabled
    assert code in run.at("faulted").alarms
    assert run.at("faulted").guidance.kind == "inhibited"


def test_camera_move_alarm_clears_when_the_camera_is_back(fasten_only: Any) -> None:
    run = (
        fasten_only()
        .unit("U-1")
        .arrive("s1")
        .camera(True, 14.2)
        .camera(True, 15.0)
        .camera(False)
        .wait(34)
        .run()
    )
    assert run.raised() == ["camera_moved"]
    assert "14.2 px" in run.of("alarm_raised")[0].message
    assert [e.code for e in run.of("alarm_cleared")] == ["camera_moved"]
    assert run.last.tool_enabled


def test_station_alarms_without_a_unit_belong_to_no_serial(fasten_only: Any) -> None:
    run = fasten_only().camera(True).run()
    assert run.of("alarm_raised")[0].serial is None


def test_tool_lost_alarms_once_per_loss(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").hidden(1000).mark("lost")
    run = sc.arrive("s1").hidden(500).run()
    assert run.raised() == ["tool_lost", "tool_lost"]
    lost = run.at("lost")
    assert (lost.guidance.kind, lost.guidance.words) == (
        "show_tool",
        "Tool not in view. Bring it to s1 label.",
    )
    assert not lost.tool_enabled


def test_tool_out_of_view_during_a_pick_is_not_an_alarm(scenario: Any) -> None:
    run = scenario().unit("U-1").hidden(1000).run()
    assert run.raised() == []


@pytest.mark.parametrize(
    ("steps", "kind", "target"),
    [
        (lambda sc: sc, "wait_for_unit", None),
        (lambda sc: sc.unit("U-1"), "take_part", "bin_a"),
        (lambda sc: sc.unit("U-1").pick(), "fasten", "s1"),
        (lambda sc: sc.unit("U-1").pick().fasten_all(), "check", "chk"),
        (
            lambda sc: sc.unit("U-1").pick().fasten_all().verdict("chk", "present"),
            "acknowledge",
            None,
        ),
        (lambda sc: sc.full_unit("U-1"), "unit_finished", None),
        (lambda sc: sc.unit("U-1").pick().link(False), "inhibited", "s1"),
    ],
)
def test_guidance_follows_the_step(
    scenario: Any, steps: Any, kind: str, target: str | None
) -> None:
    run = steps(scenario().tip(None, 50)).run()
    assert (run.last.guidance.kind, run.last.guidance.target) == (kind, target)
