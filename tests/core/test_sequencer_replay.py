"""Properties over arbitrary observation streams: enable safety, determinism, JSON replay,
and rebuilding an open unit from its events."""

from __future__ import annotations

import json
from typing import Any

from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from stationcheck.core.events import Event
from stationcheck.core.observations import (
    VERDICTS,
    Abort,
    BinActivity,
    CameraMoved,
    CheckVerdict,
    DetectorFault,
    FrameStale,
    LinkStatus,
    Observation,
    OperatorAck,
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
from stationcheck.core.plan import CheckStep, ConfirmStep, FastenStep, Limits, PickStep, StationPlan
from stationcheck.core.sequencer import Sequencer

# Fasten first so random streams reach the enable rules often; every step kind is present.
PLAN_STEPS = (
    FastenStep("fasten", ("s1", "s2", "s3"), max_attempts=2, torque_nm=Limits(4.5, 5.5)),
    PickStep("take_a", "bin_a", min_time_ms=300.0),
    CheckStep("pin", "chk"),
    ConfirmStep("done", "Put the unit away"),
)

frame_input = st.tuples(
    st.just("zone"), st.sampled_from(["s1", "s1", "s2", "s3", "out", "hidden"]), st.booleans()
)
running_input = st.tuples(st.just("running"), st.booleans())
station_input = st.one_of(
    st.tuples(st.just("unit"), st.sampled_from(["U-1", "U-2"]), st.booleans()),
    running_input,
    running_input,
    running_input,
    st.tuples(st.just("result"), st.booleans(), st.sampled_from([None, 1, 2, 3])),
    st.tuples(st.just("bin"), st.sampled_from(["bin_a", "bin_b"]), st.booleans()),
    st.tuples(st.just("verdict"), st.sampled_from(VERDICTS)),
    st.tuples(st.just("camera"), st.sampled_from([True, False, False])),
    st.tuples(st.just("link"), st.sampled_from([False, True, True])),
    st.sampled_from([("ack",), ("reset",), ("abort",), ("tick",), ("fault",), ("stale",)]),
)
# frames mostly at frame rate, sometimes late enough to go stale; inputs mostly between frames
frame_item = st.tuples(st.sampled_from([33, 33, 33, 33, 50, 120, 400]), frame_input)
station_item = st.tuples(st.sampled_from([0, 0, 0, 10, 300]), station_input)
streams = st.lists(
    st.one_of(frame_item, frame_item, frame_item, station_item),
    min_size=10,
    max_size=120,
).map(lambda steps: [(0, ("unit", "U-1", False)), *steps])


def build_stream(steps: list[tuple[int, tuple[Any, ...]]]) -> list[Observation]:
    """Turn drawn (delay ms, input) pairs into observations with consistent zone visits."""
    t_s, frame, zone, since = 1.0, 0, None, None
    out: list[Observation] = []
    for delay_ms, (name, *args) in steps:
        t_s = round(t_s + delay_ms / 1000.0, 6)
        if name == "zone":
            where, arrived = args
            visible, new_zone = where != "hidden", where if where in ("s1", "s2", "s3") else None
            if new_zone != zone:
                zone, since = new_zone, (t_s if new_zone else None)
            frame += 1
            out.append(
                ZoneObservation(t_s, frame, zone, zone if arrived else None, since,
                                (t_s - since) * 1000.0 if since is not None else 0.0, visible)
            )  # fmt: skip
        else:
            out.append(station_observation(t_s, name, args))
    return out


def station_observation(t_s: float, name: str, args: list[Any]) -> Observation:
    if name == "unit":
        serial, rework = args
        refs = (PositionRef("fasten", "s2"),) if rework else ()
        return UnitStarted(t_s, serial, rework=rework, rework_positions=refs)
    simple: dict[str, Observation] = {
        "ack": OperatorAck(t_s), "reset": Reset(t_s, "test"), "abort": Abort(t_s, "test"),
        "tick": Tick(t_s), "fault": DetectorFault(t_s, "test"), "stale": FrameStale(t_s),
    }  # fmt: skip
    if name in simple:
        return simple[name]
    if name == "running":
        return ToolRunning(t_s, args[0])
    if name == "result":
        return TighteningResult(t_s, args[0], 5.0, 30.0, args[1])
    if name == "bin":
        return BinActivity(t_s, args[0], args[1])
    if name == "verdict":
        return CheckVerdict(t_s, "chk", args[0], 0.1)
    if name == "camera":
        return CameraMoved(t_s, args[0], 10.0 if args[0] else 0.0)
    return LinkStatus(t_s, args[0])


def property_plan(default_plan: StationPlan) -> StationPlan:
    return StationPlan(default_plan.zones, PLAN_STEPS, default_plan.thresholds)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(steps=streams)
def test_enable_only_at_the_target_after_dwell_or_while_a_tightening_runs(
    default_plan: StationPlan, steps: list[tuple[int, tuple[Any, ...]]]
) -> None:
    plan = property_plan(default_plan)
    sequencer = Sequencer(plan)
    state = sequencer.initial_state()
    arrived, visible, running, link_ok = None, False, False, True
    last_result_t_s: float | None = None
    for observation in build_stream(steps):
        if isinstance(observation, ZoneObservation):
            arrived, visible = observation.arrived_zone, observation.visible
        elif isinstance(observation, ToolRunning):
            running = observation.on
        elif isinstance(observation, LinkStatus):
            link_ok = observation.ok
        state, output, new_events = sequencer.step(state, observation)
        for logged in new_events:
            if logged.kind == "tightening_result":
                last_result_t_s = logged.t_s
        if output.tool_enabled:
            event("enabled")
            assert output.target is not None and output.unit_status == "running"
            assert link_ok, "enabled while the PLC link is down"
            at_target = visible and arrived == output.target.zone
            assert at_target or running, (
                f"enabled with the tip at {arrived!r}, target {output.target}"
            )
            # every attempt is granted on its own: a new dwell counted from the last result
            if last_result_t_s is not None:
                since_ms = (output.t_s - last_result_t_s) * 1000.0
                assert since_ms >= plan.thresholds.dwell_ms - 1e-6, (
                    f"enabled {since_ms:.1f} ms after a result"
                )


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(steps=streams)
def test_replay_is_deterministic_and_survives_json(
    default_plan: StationPlan, steps: list[tuple[int, tuple[Any, ...]]]
) -> None:
    sequencer = Sequencer(property_plan(default_plan))
    stream = build_stream(steps)
    first, second = sequencer.replay(stream), sequencer.replay(stream)
    assert first == second
    lines = [json.dumps(observation_to_dict(o)) for o in stream]
    recorded = sequencer.replay([observation_from_dict(json.loads(line)) for line in lines])
    assert recorded.events == first.events and recorded.outputs == first.outputs
    logged = [Event.from_dict(json.loads(json.dumps(e.to_dict()))) for e in first.events]
    assert tuple(logged) == first.events


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(steps=streams)
def test_rebuilding_from_the_events_gives_the_same_unit(
    default_plan: StationPlan, steps: list[tuple[int, tuple[Any, ...]]]
) -> None:
    sequencer = Sequencer(property_plan(default_plan))
    state, events = sequencer.initial_state(), list[Event]()
    for observation in build_stream(steps):
        state, _, new_events = sequencer.step(state, observation)
        events.extend(new_events)
        rebuilt = sequencer.rebuild(events)
        assert rebuilt.unit == state.unit
        assert rebuilt.control.last_sequence == state.control.last_sequence
        assert rebuilt.control.hold_off_until_t_s == state.control.hold_off_until_t_s
        assert rebuilt.control.hold_off_reason == state.control.hold_off_reason
        assert not rebuilt.control.enabled


def test_an_open_unit_continues_after_a_restart(scenario: Any) -> None:
    """Kill after s1 and a NOK at s2; rebuild from the logged events; finish the unit."""
    before = scenario().unit("U-1").pick().arrive("s1").run_tightening(ok=True)
    before.arrive("s2").run_tightening(ok=False)
    first = before.run()
    sequencer = Sequencer(before.plan)
    restarted = sequencer.rebuild(first.events)
    assert restarted.unit == first.states[-1].unit
    assert not restarted.control.enabled and restarted.alarms == ()

    after = scenario()
    after.t_s = before.t_s + 5.0
    after.tip(None, 100).mark("restarted").arrive("s2").run_tightening(ok=True).fasten_all(("s3",))
    after.tip(None, 50).verdict("chk", "present").ack()
    run = after.run(state=restarted)
    assert not run.at("restarted").tool_enabled
    assert run.at("restarted").target == PositionRef("fasten", "s2")
    assert run.at("restarted").attempt == 2
    s2 = [e.to_data() for e in run.of("tightening_result") if e.zone == "s2"]
    assert [(d["attempt"], d["result"]) for d in s2] == [(2, "OK")]
    end = run.unit_end()
    assert (end.serial, end.result, end.started_t_s) == (
        "U-1",
        "OK",
        first.events[0].t_s,
    )


def test_rebuild_of_a_closed_unit_is_idle(scenario: Any) -> None:
    run = scenario().full_unit("U-3").run()
    rebuilt = Sequencer(scenario().plan).rebuild(run.events)
    assert rebuilt.unit == run.states[-1].unit and rebuilt.phase == "idle"
    assert Sequencer(scenario().plan).rebuild([]).unit is None
