"""Synthetic step logs (DEMO DATA, invented): realistic event streams for benchmarks and tests.

The events are the real sequencer's: a few unit stories (clean, retry, NOK then rework, wrong
position first, aborted, locking pin missing) are run once through
:class:`~stationcheck.core.sequencer.Sequencer` on an invented six-screw cover station, and each
generated unit is one of those stories with its own serial, start time, pace and torque/angle
values (a slow torque drift included, so trend charts have something to find).
"""

from __future__ import annotations

import functools
import random
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, replace
from typing import Any

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import RESULT_OK, Event
from stationcheck.core.observations import (
    Abort,
    BinActivity,
    CheckVerdict,
    Observation,
    PositionRef,
    TighteningResult,
    ToolRunning,
    UnitStarted,
    Verdict,
    ZoneObservation,
)
from stationcheck.core.plan import (
    CheckStep,
    FastenStep,
    Limits,
    PickStep,
    StationPlan,
    ZoneSpec,
)
from stationcheck.core.sequencer import Sequencer

FRAME_S = 1.0 / 30.0
SERIAL_PREFIX = "DEMO-"
POSITIONS = ("p1", "p4", "p2", "p5", "p3", "p6")  # cross order on a six-screw bolt circle
TORQUE_NM = Limits(9.0, 11.0)
ANGLE_DEG = Limits(20.0, 60.0)
# how often each position is the one that goes wrong (invented, Pareto-like)
FAILURE_WEIGHTS = {"p3": 0.35, "p5": 0.25, "p1": 0.15, "p6": 0.12, "p2": 0.08, "p4": 0.05}
Batch = tuple[Event, ...]


def _square(zone_id: str, kind: str, x0: float, y0: float) -> ZoneSpec:
    return ZoneSpec(
        zone_id,
        kind,  # type: ignore[arg-type]
        ((x0, y0), (x0 + 30, y0), (x0 + 30, y0 + 30), (x0, y0 + 30)),
        label=zone_id,
    )


def demo_plan() -> StationPlan:
    """An invented pump end-cover station (demo data): two picks, six screws, a locking pin."""
    zones = tuple(
        _square(z, "fastener", 100 + 60 * i, 100) for i, z in enumerate(sorted(POSITIONS))
    )
    zones += (
        _square("bin_gasket", "bin", 20, 300),
        _square("bin_cover", "bin", 500, 300),
        _square("pin", "check", 300, 400),
    )
    steps = (
        PickStep("take_gasket", "bin_gasket", min_time_ms=300.0),
        PickStep("take_cover", "bin_cover", min_time_ms=300.0),
        FastenStep(
            "cover_screws", POSITIONS, max_attempts=2, torque_nm=TORQUE_NM, angle_deg=ANGLE_DEG
        ),
        CheckStep("locking_pin", "pin", expect="present"),
    )
    return StationPlan(zones=zones, steps=steps)


class StationScript:
    """Observations as the station would send them: frames at 30 fps plus station inputs."""

    def __init__(self, start_t_s: float = 0.0) -> None:
        self.t_s = start_t_s
        self.observations: list[Observation] = []
        self._frame = 0
        self._zone: str | None = None
        self._since: float | None = None

    def frames(self, zone: str | None, ms: float) -> StationScript:
        for _ in range(max(1, round(ms / 1000.0 / FRAME_S))):
            self.t_s = round(self.t_s + FRAME_S, 6)
            self._frame += 1
            if zone != self._zone:
                self._zone, self._since = zone, (self.t_s if zone is not None else None)
            dwell_ms = (self.t_s - self._since) * 1000.0 if self._since is not None else 0.0
            self.observations.append(
                ZoneObservation(
                    t_s=self.t_s,
                    frame_index=self._frame,
                    zone=zone,
                    arrived_zone=zone if dwell_ms >= 200.0 - 1e-6 else None,
                    since_t_s=self._since,
                    dwell_ms=dwell_ms,
                    visible=True,
                    tip_px=(0.0, 0.0),
                )
            )
        return self

    def add(self, observation: Observation) -> StationScript:
        self.observations.append(observation)
        return self

    def pick(self, zone: str) -> StationScript:
        self.add(BinActivity(self.t_s, zone, True)).frames(None, 350)
        return self.add(BinActivity(self.t_s, zone, False))

    def tighten(self, zone: str, ok: bool, torque_nm: float | None = None) -> StationScript:
        """Tip to the zone, dwell, run, the controller's result, tool off, tip away."""
        torque_nm = torque_nm if torque_nm is not None else (10.0 if ok else 7.0)
        self.frames(zone, 250).add(ToolRunning(self.t_s, True)).frames(zone, 300)
        self.add(TighteningResult(self.t_s, ok, torque_nm, 40.0, sequence=None))
        return self.add(ToolRunning(self.t_s, False)).frames(None, 100)

    def start(self, serial: str, rework: tuple[str, ...] = ()) -> StationScript:
        refs = tuple(PositionRef("cover_screws", z) for z in rework)
        return self.add(UnitStarted(self.t_s, serial, rework=bool(rework), rework_positions=refs))

    def fasten(self, zones: tuple[str, ...], fails: Mapping[str, int]) -> StationScript:
        """Each zone in turn; ``fails[zone]`` NOK attempts before the OK one (2 uses them up)."""
        for zone in zones:
            for attempt in range(2):
                ok = attempt >= fails.get(zone, 0)
                self.tighten(zone, ok)
                if ok:
                    break
        return self

    def verdict(self, verdict: Verdict) -> StationScript:
        return self.frames(None, 200).add(CheckVerdict(self.t_s, "pin", verdict, 0.8))

    def abort(self, reason: str) -> StationScript:
        return self.add(Abort(self.t_s, reason))

    def unit(
        self, serial: str, fails: Mapping[str, int], rework: tuple[str, ...] = ()
    ) -> StationScript:
        self.start(serial, rework)
        if not rework:
            self.frames(None, 100).pick("bin_gasket").pick("bin_cover")
        return self.fasten(rework or POSITIONS, fails).verdict("present")


def _story(name: str, zone: str = "p3") -> StationScript:
    script = StationScript()
    if name == "clean":
        return script.unit("TEMPLATE", {})
    if name == "retry":
        return script.unit("TEMPLATE", {zone: 1})
    if name == "rework":
        return script.unit("TEMPLATE", {zone: 2}).frames(None, 5000).unit("TEMPLATE", {}, (zone,))
    if name == "scrapped":
        return script.unit("TEMPLATE", {zone: 2})
    if name == "wrong_position":
        script.start("TEMPLATE").frames(None, 100).pick("bin_gasket").pick("bin_cover")
        script.frames(POSITIONS[1], 500)
        return script.fasten(POSITIONS, {}).verdict("present")
    if name == "aborted":
        script.start("TEMPLATE").frames(None, 100).pick("bin_gasket")
        return script.frames(None, 2000).abort("unit taken off the fixture")
    if name == "pin_missing":
        script.start("TEMPLATE").frames(None, 100).pick("bin_gasket").pick("bin_cover")
        script.fasten(POSITIONS, {}).verdict("absent").frames(None, 3000)
        return script.abort("locking pin missing; unit to repair")
    raise ValueError(f"unknown story {name!r}")


@dataclass(frozen=True)
class Story:
    name: str
    weight: float
    batches: tuple[Batch, ...]  # relative to t_s 0, serial "TEMPLATE"
    duration_s: float

    @property
    def tightening_ok(self) -> tuple[bool, ...]:
        return tuple(
            e.result == RESULT_OK
            for b in self.batches
            for e in b
            if isinstance(e, ev.TighteningResult)
        )


def build_stories() -> tuple[Story, ...]:
    """Each story run once through the real sequencer, its events grouped per step."""
    sequencer = Sequencer(demo_plan())
    plain = {"clean": 0.86, "wrong_position": 0.03, "aborted": 0.006, "pin_missing": 0.004}
    shares = {"retry": 0.07, "rework": 0.025, "scrapped": 0.005}
    stories: list[Story] = []
    wanted = [(n, "p3", w) for n, w in plain.items()]
    wanted += [(n, z, s * w) for n, s in shares.items() for z, w in FAILURE_WEIGHTS.items()]
    for name, zone, weight in wanted:
        state = sequencer.initial_state()
        batches: list[Batch] = []
        script = _story(name, zone)
        for observation in script.observations:
            state, _, events = sequencer.step(state, observation)
            if events:
                batches.append(events)
        stories.append(Story(f"{name}:{zone}", weight, tuple(batches), script.t_s))
    return tuple(stories)


@dataclass(frozen=True)
class UnitDraw:
    """Everything random about one generated unit: which story, when, how fast, and the
    (torque_nm, angle_deg, controller sequence) of each of its tightening results in order."""

    serial: str
    story: int
    t0_s: float
    pace: float
    tightenings: tuple[tuple[float, float, int], ...]


def shift_time(t_s: float, draw: UnitDraw) -> float:
    return draw.t0_s + t_s * draw.pace


def is_time_key(key: str, value: Any) -> bool:
    return key.endswith("t_s") and isinstance(value, float)


def unit_event(event: Event, draw: UnitDraw, tightening: int) -> Event:
    """The story event for this unit (``tightening``: index of the result, if one): its times
    shifted (in the stored data, so every time field moves), its tightening values drawn."""
    data: dict[str, Any] = {}
    for key, value in event.to_data().items():
        if is_time_key(key, value):
            value = shift_time(value, draw)
        elif key == "cycle_time_s" and isinstance(value, float):
            value = value * draw.pace
        data[key] = value
    shifted = Event.from_data(
        shift_time(event.t_s, draw),
        event.kind,
        draw.serial if event.serial is not None else None,
        data,
    )
    if isinstance(shifted, ev.TighteningResult):
        torque, angle, sequence = draw.tightenings[tightening]
        shifted = replace(
            shifted,
            torque=replace(shifted.torque, value=torque),
            angle=replace(shifted.angle, value=angle),
            sequence=sequence,
            within_limits=TORQUE_NM.contains(torque) and ANGLE_DEG.contains(angle),
        )
    return shifted


@functools.lru_cache(maxsize=1)
def stories() -> tuple[Story, ...]:
    return build_stories()


class UnitStream:
    """Endless synthetic units from a seed: :meth:`next_draw` decides one unit,
    :meth:`next_unit` also renders its events (batches as the sequencer emitted them)."""

    def __init__(self, seed: int, start_t_s: float = 1_700_000_000.0, gap_s: float = 20.0) -> None:
        self._rng = random.Random(seed)
        self.stories = stories()
        self._weights = [s.weight for s in self.stories]
        self._t_s = start_t_s
        self._gap_s = gap_s
        self._sequence = 0
        self.count = 0

    def _torque(self, ok: bool) -> float:
        drift = 0.25 * (self.count % 200_000) / 200_000.0  # a socket wearing over 200k units
        if ok:
            value = min(max(self._rng.gauss(10.0 + drift, 0.22), TORQUE_NM.low), TORQUE_NM.high)
        else:
            value = TORQUE_NM.low - self._rng.uniform(0.3, 2.5)
        return round(value, 3)

    def next_draw(self) -> UnitDraw:
        index = self._rng.choices(range(len(self.stories)), self._weights)[0]
        story = self.stories[index]
        values = []
        for ok in story.tightening_ok:
            self._sequence += 1
            values.append((self._torque(ok), round(self._rng.gauss(40.0, 5.0), 2), self._sequence))
        self.count += 1
        draw = UnitDraw(
            f"{SERIAL_PREFIX}{self.count:07d}",
            index,
            self._t_s,
            round(self._rng.uniform(2.5, 4.0), 3),
            tuple(values),
        )
        self._t_s = (
            draw.t0_s + story.duration_s * draw.pace + self._rng.expovariate(1 / self._gap_s)
        )
        return draw

    def render(self, draw: UnitDraw) -> tuple[Batch, ...]:
        batches: list[Batch] = []
        tightening = 0
        for batch in self.stories[draw.story].batches:
            events = []
            for e in batch:
                events.append(unit_event(e, draw, tightening))
                tightening += isinstance(e, ev.TighteningResult)
            batches.append(tuple(events))
        return tuple(batches)

    def next_unit(self) -> tuple[str, tuple[Batch, ...]]:
        draw = self.next_draw()
        return draw.serial, self.render(draw)

    def units(self, count: int) -> Iterator[tuple[str, tuple[Batch, ...]]]:
        for _ in range(count):
            yield self.next_unit()
