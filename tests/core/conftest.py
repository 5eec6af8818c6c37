"""Factories for core tests: a small invented station plan and an observation-stream DSL.

A scenario reads like what happens at the station::

    sc = scenario()                      # default plan: pick, fasten s1-s2-s3, check, confirm
    sc.unit("U-1").bin("bin_a", True).wait(400).bin("bin_a", False)
    sc.arrive("s1").run_tightening(ok=True)
    run = sc.run()                       # outputs, events and states, one per observation

Frames come at 30 fps; each frame is a ZoneObservation built like the zone map would (the visit
starts when the tip enters a zone, "arrived" once it stayed ``dwell_ms``). Station inputs happen
at the time of the last frame.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import pytest

from stationcheck.core.events import Event
from stationcheck.core.observations import (
    Abort,
    BinActivity,
    CameraMoved,
    CheckVerdict,
    DetectorFault,
    FrameStale,
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
    Verdict,
    ZoneObservation,
)
from stationcheck.core.outputs import Output
from stationcheck.core.plan import (
    CheckStep,
    ConfirmStep,
    FastenStep,
    Limits,
    PickStep,
    StationPlan,
    Step,
    Thresholds,
    ZoneSpec,
)
from stationcheck.core.sequencer import Sequencer
from stationcheck.core.state import SequencerState

FRAME_PERIOD_S = 1.0 / 30.0


def square(zone_id: str, kind: str, x0: float, y0: float, size: float = 30.0) -> ZoneSpec:
    return ZoneSpec(
        id=zone_id,
        kind=kind,  # type: ignore[arg-type]
        polygon_px=((x0, y0), (x0 + size, y0), (x0 + size, y0 + size), (x0, y0 + size)),
        label=f"{zone_id} label",
    )


ZONES = (
    square("s1", "fastener", 100, 100),
    square("s2", "fastener", 200, 100),
    square("s3", "fastener", 300, 100),
    square("bin_a", "bin", 10, 300, 80),
    square("bin_b", "bin", 500, 300, 80),
    square("chk", "check", 400, 400, 40),
)

FASTEN = FastenStep(
    id="fasten",
    zones=("s1", "s2", "s3"),
    max_attempts=2,
    on_failure="continue",
    torque_nm=Limits(4.5, 5.5),
    angle_deg=Limits(15.0, 45.0),
)
DEFAULT_STEPS: tuple[Step, ...] = (
    PickStep(id="take_a", zone="bin_a", min_time_ms=300.0),
    FASTEN,
    CheckStep(id="pin", zone="chk", expect="present"),
    ConfirmStep(id="done", prompt="Put the unit on the conveyor"),
)


def make_plan(steps: tuple[Step, ...] = DEFAULT_STEPS, **thresholds: float) -> StationPlan:
    return StationPlan(zones=ZONES, steps=steps, thresholds=Thresholds(**thresholds))


@dataclass
class Run:
    observations: list[Observation]
    outputs: list[Output]
    events_per_step: list[tuple[Event, ...]]
    states: list[SequencerState]
    marks: dict[str, int]

    @property
    def events(self) -> list[Event]:
        return [event for batch in self.events_per_step for event in batch]

    @property
    def last(self) -> Output:
        return self.outputs[-1]

    def at(self, mark: str) -> Output:
        return self.outputs[self.marks[mark]]

    def kinds(self) -> list[str]:
        return [event.kind for event in self.events]

    def of(self, kind: str) -> list[Event]:
        return [event for event in self.events if event.kind == kind]

    def raised(self) -> list[str]:
        return [str(event.code) for event in self.of("alarm_raised")]

    def enabled(self) -> list[bool]:
        return [output.tool_enabled for output in self.outputs]

    def unit_end(self) -> Event:
        ends = self.of("unit_ended")
        assert len(ends) == 1, f"expected one unit_ended, got {len(ends)}"
        return ends[0]


@dataclass
class Scenario:
    plan: StationPlan
    t_s: float = 1.0
    observations: list[Observation] = field(default_factory=list)
    marks: dict[str, int] = field(default_factory=dict)
    _frame: int = 0
    _zone: str | None = None
    _since: float | None = None
    _sequence: Any = field(default_factory=lambda: itertools.count(1))

    # ---- frames
    def frame(self, zone: str | None, visible: bool = True) -> Scenario:
        self.t_s = round(self.t_s + FRAME_PERIOD_S, 6)
        self._frame += 1
        if not visible or zone is None:
            self._zone, self._since = None, None
        elif zone != self._zone:
            self._zone, self._since = zone, self.t_s
        dwell_ms = (self.t_s - self._since) * 1000.0 if self._since is not None else 0.0
        arrived = self._zone if dwell_ms >= self.plan.thresholds.dwell_ms - 1e-6 else None
        return self.add(
            ZoneObservation(
                t_s=self.t_s,
                frame_index=self._frame,
                zone=self._zone,
                arrived_zone=arrived,
                since_t_s=self._since,
                dwell_ms=dwell_ms,
                visible=visible,
                tip_px=(0.0, 0.0) if visible else None,
            )
        )

    def frames(self, zone: str | None, ms: float, visible: bool = True) -> Scenario:
        for _ in range(max(1, round(ms / 1000.0 / FRAME_PERIOD_S))):
            self.frame(zone, visible)
        return self

    def tip(self, zone: str | None, ms: float = 100.0) -> Scenario:
        """The tip is (visibly) in ``zone`` (None: in no zone) for ``ms`` of frames."""
        return self.frames(zone, ms)

    def arrive(self, zone: str) -> Scenario:
        """The tip enters ``zone`` and stays until it has dwelled (one frame more)."""
        return self.frames(zone, self.plan.thresholds.dwell_ms + 2 * FRAME_PERIOD_S * 1000.0)

    def hidden(self, ms: float) -> Scenario:
        return self.frames(None, ms, visible=False)

    def gap(self, ms: float) -> Scenario:
        """No frames for ``ms``; a clock tick says time passed."""
        self.t_s = round(self.t_s + ms / 1000.0, 6)
        return self.add(Tick(self.t_s))

    def wait(self, ms: float) -> Scenario:
        """Time passes with frames of the tip where it is."""
        return self.frames(self._zone, ms, visible=True)

    # ---- station inputs
    def add(self, observation: Observation) -> Scenario:
        self.observations.append(observation)
        return self

    def mark(self, name: str) -> Scenario:
        self.marks[name] = len(self.observations) - 1
        return self

    def unit(self, serial: str, rework: bool = False, positions: tuple[str, ...] = ()) -> Scenario:
        refs = tuple(PositionRef("fasten", zone) for zone in positions)
        return self.add(UnitStarted(self.t_s, serial, rework=rework, rework_positions=refs))

    def running(self, on: bool = True) -> Scenario:
        return self.add(ToolRunning(self.t_s, on))

    def result(
        self,
        ok: bool = True,
        torque_nm: float | None = 5.0,
        angle_deg: float | None = 30.0,
        sequence: int | None = -1,
    ) -> Scenario:
        number = next(self._sequence) if sequence == -1 else sequence
        return self.add(TighteningResult(self.t_s, ok, torque_nm, angle_deg, number))

    def run_tightening(self, ok: bool = True, **values: Any) -> Scenario:
        """Running on, a frame later the result, then running off (the usual order). After a
        NOK the tip stays where it is for a new dwell, so a retry there can be granted."""
        self.running(True).wait(34)
        self.result(ok, **values).running(False)
        return self if ok else self.redwell()

    def redwell(self) -> Scenario:
        """The tip stays where it is until a dwell counted from now has passed (one frame more)."""
        return self.wait(self.plan.thresholds.dwell_ms + 2 * FRAME_PERIOD_S * 1000.0)

    def ack(self) -> Scenario:
        return self.add(OperatorAck(self.t_s))

    def reset(self, reason: str = "operator reset") -> Scenario:
        return self.add(Reset(self.t_s, reason))

    def abort(self, reason: str = "unit removed") -> Scenario:
        return self.add(Abort(self.t_s, reason))

    def bin(self, zone: str, active: bool) -> Scenario:
        return self.add(BinActivity(self.t_s, zone, active))

    def pick(self, zone: str = "bin_a", ms: float = 400.0) -> Scenario:
        return self.bin(zone, True).wait(ms).bin(zone, False)

    def verdict(self, zone: str, verdict: Verdict, margin: float = 0.5) -> Scenario:
        return self.add(CheckVerdict(self.t_s, zone, verdict, margin))

    def camera(self, moved: bool, shift_px: float = 12.0) -> Scenario:
        return self.add(CameraMoved(self.t_s, moved, shift_px if moved else 0.0))

    def link(self, ok: bool) -> Scenario:
        return self.add(LinkStatus(self.t_s, ok))

    def picture(self, judgeable: bool = True, camera_checkable: bool = True,
                reason: str = "too noisy") -> Scenario:
        bad = not (judgeable and camera_checkable)
        return self.add(PictureState(self.t_s, judgeable, camera_checkable,
                                     reason if bad else "", brightness=40.0, noise_sigma=7.5))

    def detector_fault(self, reason: str = "output was NaN") -> Scenario:
        return self.add(DetectorFault(self.t_s, reason))

    def stale(self) -> Scenario:
        return self.add(FrameStale(self.t_s, age_ms=150.0))

    # ---- whole passes
    def fasten_all(self, zones: tuple[str, ...] = ("s1", "s2", "s3")) -> Scenario:
        for zone in zones:
            self.arrive(zone).run_tightening(ok=True)
        return self

    def full_unit(self, serial: str = "U-1") -> Scenario:
        self.unit(serial).tip(None, 50).pick().fasten_all()
        return self.tip(None, 50).verdict("chk", "present").ack()

    def run(self, state: SequencerState | None = None) -> Run:
        sequencer = Sequencer(self.plan)
        state = state if state is not None else sequencer.initial_state()
        outputs, batches, states = [], [], []
        for observation in self.observations:
            state, output, events = sequencer.step(state, observation)
            outputs.append(output)
            batches.append(events)
            states.append(state)
        return Run(list(self.observations), outputs, batches, states, dict(self.marks))


@pytest.fixture
def scenario() -> Callable[..., Scenario]:
    def build(steps: tuple[Step, ...] = DEFAULT_STEPS, **thresholds: float) -> Scenario:
        return Scenario(make_plan(steps, **thresholds))

    return build


@pytest.fixture
def fasten_only() -> Callable[..., Scenario]:
    """A unit that is only the fasten step (optionally changed with keyword arguments)."""

    def build(**changes: Any) -> Scenario:
        step = FastenStep(**{**FASTEN.__dict__, **changes})
        return Scenario(make_plan((step,)))

    return build


@pytest.fixture(scope="session")
def default_plan() -> StationPlan:
    return make_plan()
