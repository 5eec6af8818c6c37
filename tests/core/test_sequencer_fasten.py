"""Fastener positions: results, attempts, rework marking, limits, wrong positions."""

from __future__ import annotations

from typing import Any

import pytest


def test_ok_results_complete_the_positions_in_order(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").fasten_all().run()
    done = [
        (e.zone, e.position, e.attempts)
        for e in run.of("position_completed")
    ]
    assert done == [("s1", 1, 1), ("s2", 2, 1), ("s3", 3, 1)]
    end = run.unit_end().to_data()
    assert (end["result"], end["released"], end["failed_positions"]) == ("OK", True, [])
    assert run.last.unit_status == "ok"


def test_a_tightening_result_carries_everything_the_log_needs(fasten_only: Any) -> None:
    run = (
        fasten_only()
        .unit("U-1")
        .arrive("s1")
        .run_tightening(ok=True, torque_nm=5.1, angle_deg=31.0)
        .run()
    )
    (result,) = run.of("tightening_result")
    assert result.serial == "U-1"
    assert result.to_data()["torque"] == {"value": 5.1, "low": 4.5, "high": 5.5, "unit": "N·m"}
    assert result.to_data()["angle"] == {"value": 31.0, "low": 15.0, "high": 45.0, "unit": "deg"}
    expected = {"step": "fasten", "zone": "s1", "position": 1, "attempt": 1, "max_attempts": 2}
    assert {key: getattr(result, key) for key in expected} == expected
    assert (result.result, result.rework, result.within_limits) == (
        "OK",
        False,
        True,
    )
    assert result.started_t_s < result.ended_t_s == result.t_s


@pytest.mark.parametrize(
    ("results", "attempts", "failed"),
    [
        ((True,), 1, False),
        ((False, True), 2, False),
        ((False, False), 2, True),
    ],
)
def test_nok_counts_an_attempt_and_the_last_one_marks_rework(
    fasten_only: Any, results: tuple[bool, ...], attempts: int, failed: bool
) -> None:
    sc = fasten_only().unit("U-1").arrive("s1")
    for ok in results:
        sc.run_tightening(ok=ok)
    run = sc.run()
    assert [e.attempt for e in run.of("tightening_result")] == list(range(1, attempts + 1))
    decided = run.of("position_failed" if failed else "position_completed")
    assert [(e.zone, e.attempts) for e in decided] == [("s1", attempts)]
    assert run.last.target is not None and run.last.target.zone == "s2"
    assert [ref.zone for ref in run.last.failed_positions] == (["s1"] if failed else [])


def test_continue_policy_finishes_the_unit_and_lists_failed_positions(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True)
    sc.arrive("s2").run_tightening(ok=False).run_tightening(ok=False)
    run = sc.arrive("s3").run_tightening(ok=True).run()
    end = run.unit_end().to_data()
    assert (end["result"], end["released"], end["ended_by"]) == ("NotOK", False, "completed")
    assert end["failed_positions"] == [{"step": "fasten", "zone": "s2"}]
    assert run.last.unit_status == "nok"
    assert "rework needed at s2 label" in run.last.guidance.words


def test_stop_unit_policy_ends_the_unit_at_the_failed_position(fasten_only: Any) -> None:
    sc = fasten_only(on_failure="stop_unit").unit("U-1").arrive("s1").run_tightening(ok=True)
    run = sc.arrive("s2").run_tightening(ok=False).run_tightening(ok=False).run()
    end = run.unit_end().to_data()
    assert (end["result"], end["ended_by"]) == ("NotOK", "stopped_on_failure")
    assert end["failed_positions"] == [{"step": "fasten", "zone": "s2"}]
    assert end["unfinished_positions"] == [{"step": "fasten", "zone": "s3"}]
    assert run.of("step_completed")[-1].result == "NotOK"
    assert not run.last.tool_enabled


@pytest.mark.parametrize(
    ("ok", "torque_nm", "angle_deg", "result", "warned"),
    [
        (True, 5.0, 30.0, "OK", False),
        (True, 4.5, 45.0, "OK", False),  # limits are inclusive
        (True, 6.2, 30.0, "OK", True),  # controller OK is authoritative; out of band warns
        (True, 5.0, 10.0, "OK", True),
        (True, None, None, "OK", False),  # no values reported: nothing to compare
        (False, 5.0, 30.0, "NotOK", False),  # NOK within limits is still NOK
        (False, 9.0, 30.0, "NotOK", False),
    ],
)
def test_controller_verdict_decides_and_limits_only_warn(
    fasten_only: Any,
    ok: bool,
    torque_nm: float | None,
    angle_deg: float | None,
    result: str,
    warned: bool,
) -> None:
    run = (
        fasten_only()
        .unit("U-1")
        .arrive("s1")
        .run_tightening(ok=ok, torque_nm=torque_nm, angle_deg=angle_deg)
        .run()
    )
    (event,) = run.of("tightening_result")
    assert event.result == result
    assert ("result_outside_limits" in run.raised()) is warned


def test_result_without_enable_is_an_alarm_and_completes_nothing(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").tip(None, 300).result(ok=True).run()
    assert run.raised() == ["result_without_enable"]
    alarm = run.of("alarm_raised")[0]
    assert alarm.serial == "U-1" and alarm.result == "OK"
    assert run.of("tightening_result") == [] and run.of("position_completed") == []
    assert run.last.target is not None and run.last.target.zone == "s1"


@pytest.mark.parametrize("phase_steps", ["pick", "idle"])
def test_results_outside_a_fasten_step_are_rejected(scenario: Any, phase_steps: str) -> None:
    sc = scenario()
    if phase_steps == "pick":
        sc.unit("U-1")
    run = sc.arrive("s1").result(ok=True).run()
    assert run.raised() == ["result_without_enable"]
    assert run.of("alarm_raised")[0].serial == ("U-1" if phase_steps == "pick" else None)


def test_wrong_position_alarms_once_per_visit_and_guides_to_the_target(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s2").wait(1000).mark("at_s2")
    run = sc.tip(None, 100).arrive("s3").tip(None, 100).arrive("s2").run()
    wrong = [(e.subject, e.expected) for e in run.of("alarm_raised")]
    assert wrong == [("s2", "s1"), ("s3", "s1"), ("s2", "s1")]
    assert len(run.of("alarm_cleared")) == 2
    guidance = run.at("at_s2").guidance
    assert (guidance.kind, guidance.target) == ("wrong_position", "s1")
    assert guidance.words == "Wrong position: this is s2 label. Go to s1 label."
    assert "wrong_position" in run.at("at_s2").alarms
    assert not any(run.enabled())


def test_staying_at_the_position_just_done_is_not_a_wrong_position(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True).wait(1000).mark("stayed")
    run = sc.tip(None, 100).arrive("s1").run()
    assert run.raised() == ["wrong_position"]
    assert run.at("stayed").guidance.kind == "fasten"
    assert run.at("stayed").target is not None and run.at("stayed").target.zone == "s2"


def test_guidance_names_position_and_attempt(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=False).run()
    guidance = run.last.guidance
    assert (guidance.kind, guidance.target) == ("fasten", "s1")
    assert guidance.words == "Fasten s1 label (order 1 of 3, attempt 2 of 2)."
    assert (run.last.position_number, run.last.attempt) == (1, 2)
