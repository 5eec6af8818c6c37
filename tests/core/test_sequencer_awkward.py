"""Inputs in awkward orders: what real signal wiring and real operators produce."""

from __future__ import annotations

from typing import Any

from stationcheck.core.filters import OneEuroSettings
from stationcheck.core.observations import Tick, UnitStarted
from stationcheck.core.plan import StationPlan, Thresholds
from stationcheck.core.records import Keypoint, Keypoints
from stationcheck.core.sequencer import Sequencer
from stationcheck.core.tracker import Tracker, TrackerSettings
from stationcheck.core.zones import ZoneMap


def test_a_result_with_no_run_started_while_enabled_is_rejected(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").result(ok=True).run()
    assert run.of("position_completed") == []
    assert run.raised() == ["result_without_enable"]
    assert run.of("alarm_raised")[0].reason == "not_credited"
    assert run.last.result_status == "rejected_not_credited"
    assert run.last.last_event == "result_without_enable" and run.last.event_count == 1
    assert run.last.target is not None and run.last.target.zone == "s1"


def test_a_run_while_inhibited_is_never_credited_to_the_target(fasten_only: Any) -> None:
    """The target was granted once (enabled_for), then the tip left and the tool ran while
    inhibited: its result is rejected, not credited to the target."""
    run = (fasten_only().unit("U-1").arrive("s1").tip(None).running(True).running(False)
           .result(ok=True).run())
    assert run.of("position_completed") == []
    assert run.raised() == ["ran_while_inhibited", "result_without_enable"]
    assert run.last.result_status == "rejected_not_credited"


def test_an_accepted_result_says_so_in_the_output(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True).run()
    assert run.last.result_status == "accepted"
    assert run.last.event_count == 0


def test_two_results_for_one_enable_count_once(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=True).result(ok=True).run()
    assert len(run.of("tightening_result")) == 1
    assert run.raised() == ["result_without_enable"]


def test_a_repeated_result_with_the_same_sequence_is_ignored(fasten_only: Any) -> None:
    run = (
        fasten_only()
        .unit("U-1")
        .arrive("s1")
        .run_tightening(ok=False, sequence=7)
        .result(ok=False, sequence=7)
        .run()
    )
    assert [e.attempt for e in run.of("tightening_result")] == [1]
    assert run.raised() == ["duplicate_result"]
    assert run.of("position_failed") == []


def test_nok_then_tip_leaves_then_returns_for_the_retry(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").run_tightening(ok=False).tip(None, 200).mark("away")
    run = sc.arrive("s1").mark("back").run_tightening(ok=True).run()
    assert not run.at("away").tool_enabled and run.at("away").attempt == 2
    assert run.at("back").tool_enabled
    completed = run.of("position_completed")[0].to_data()
    assert (completed["zone"], completed["attempts"]) == ("s1", 2)


def test_running_stops_without_a_result_then_the_result_comes_late(fasten_only: Any) -> None:
    sc = (
        fasten_only()
        .unit("U-1")
        .arrive("s1")
        .running(True)
        .tip(None, 100)
        .running(False)
        .mark("stopped")
    )
    run = sc.wait(100).result(ok=True).run()
    assert not run.at("stopped").tool_enabled
    assert run.of("run_stopped")[0].awaiting_result is True
    assert [e.zone for e in run.of("position_completed")] == ["s1"]


def test_a_second_run_without_a_result_for_the_first_warns(fasten_only: Any) -> None:
    run = fasten_only().unit("U-1").arrive("s1").running(True).running(False).running(True).run()
    assert run.raised() == ["run_without_result"]
    assert run.last.tool_enabled


def test_stale_frame_while_running_cuts_the_tightening_and_flags_its_result(
    fasten_only: Any,
) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").running(True).stale().gap(400).mark("stale")
    run = sc.result(ok=False).running(False).run()
    assert not run.at("stale").tool_enabled
    assert run.at("stale").enable_reason == "frame_stale"
    assert "frame_stale" in run.at("stale").alarms
    (result,) = run.of("tightening_result")
    assert result.run_cut == "frame_stale"
    assert "result_of_cut_run" in run.raised()
    assert not run.last.tool_enabled


def test_timestamps_running_backwards_do_not_rewind_time(fasten_only: Any) -> None:
    sc = fasten_only().unit("U-1").arrive("s1")
    late = sc.t_s
    sc.gap(50)
    run = sc.add(Tick(late - 5.0)).run()
    assert run.last.t_s == run.outputs[-2].t_s
    assert run.last.tool_enabled


def flicker_at_edge(
    plan: StationPlan, hysteresis_px: float
) -> tuple[list[bool], set[float | None], float]:
    """The real tracker (filter nearly transparent: high beta), zone map and sequencer on a tip
    that jitters 3 px either side of s1's right edge (x = 130) after settling inside."""
    plan = StationPlan(
        plan.zones, plan.steps, Thresholds(hysteresis_px=hysteresis_px, dwell_ms=200.0)
    )
    tracker = Tracker(TrackerSettings(smoothing=OneEuroSettings(beta=10.0)))
    zones = ZoneMap.from_plan(plan)
    sequencer = Sequencer(plan)
    state, _, _ = sequencer.step(sequencer.initial_state(), UnitStarted(0.0, "U-1"))
    track, visit = tracker.initial_state(), zones.initial_state()
    enabled, entries, max_x_px = [], set(), 0.0
    for i in range(90):
        t_s = i / 30.0
        x_px = 128.0 if i < 10 else (127.0 if i % 2 else 133.0)
        track, pose = tracker.update(track, Keypoints(i, t_s, (Keypoint("tip", x_px, 115.0, 0.9),)))
        assert pose.tip_px is not None
        max_x_px = max(max_x_px, pose.tip_px[0])
        visit, observation = zones.observe(visit, pose)
        state, output, _ = sequencer.step(state, observation)
        enabled.append(output.tool_enabled)
        entries.add(observation.since_t_s)
    return enabled, entries, max_x_px


def test_tip_flickering_on_a_zone_edge_within_hysteresis_keeps_enable(fasten_only: Any) -> None:
    enabled, entries, max_x_px = flicker_at_edge(fasten_only().plan, hysteresis_px=4.0)
    assert max_x_px > 132.0, "the smoothed tip must really cross the edge"
    assert entries == {0.0}, "the tip must never leave s1"
    assert enabled.index(True) == 6  # 200 ms dwell at 30 fps
    assert all(enabled[6:])


def test_without_hysteresis_the_same_flicker_breaks_the_visit(fasten_only: Any) -> None:
    enabled, entries, _ = flicker_at_edge(fasten_only().plan, hysteresis_px=0.0)
    assert len(entries) > 10
    assert not any(enabled[12:])


def test_a_link_event_is_logged_as_its_one_off_alarm_and_latched(fasten_only: Any) -> None:
    from stationcheck.core.observations import LinkEvent

    run = fasten_only().add(LinkEvent(0.0, "plc_session_restart", "result_sequence 6 -> 0")).run()
    assert run.raised() == ["plc_session_restart"]
    assert (run.last.last_event, run.last.event_count) == ("plc_session_restart", 1)


def test_a_link_event_must_name_a_one_off_alarm() -> None:
    import pytest

    from stationcheck.core.observations import LinkEvent

    with pytest.raises(ValueError, match="one-off alarm"):
        LinkEvent(0.0, "link_lost")
