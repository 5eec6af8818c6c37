"""The fault soak: the real frame path on replayed footage with faults injected, every frame's
enable compared with the ground truth.

One frame slot per camera period, the footage looped. Before a slot, the station inputs and
injected inputs due by then are applied (the replay's merge rule); then the slot's frame goes
through :class:`~stationcheck.pipeline.frame_path.FramePath` (a stalled camera gives ticks every
10 ms instead, as the live loop's cycle). After it the enable is judged against the truth:
enabled while the true tip is not in the target zone (inside or within its hysteresis, the
replay's false-enable rule) is a false enable, unless a fault is active that is not yet
detectable or became so less than the bound ago (those frames are counted apart: no station
can know before, and the bound is measured on its own). For every fault,
the time from the moment it became detectable (``faults.DETECTABLE``) to the enable being off.
"""

from __future__ import annotations

import math
import random
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from stationcheck.config.judgement_settings import CameraShiftSettings
from stationcheck.core import event_kinds as ev
from stationcheck.core.observations import (
    CameraMoved,
    LinkStatus,
    Observation,
    PositionRef,
    Reset,
    Tick,
    TighteningResult,
    ToolRunning,
)
from stationcheck.core.records import Frame, Keypoint, Keypoints
from stationcheck.errors import ModelOutputError
from stationcheck.pipeline.comparison import truly_at_target
from stationcheck.pipeline.decision_core import DecisionCore, DecisionStep
from stationcheck.pipeline.frame_path import FramePath
from stationcheck.pipeline.truth_sidecar import TruthJudge
from stationcheck.soak.faults import TRIGGER_WAIT_S, PlannedFault, fault_stream
from stationcheck.soak.footage import Footage
from stationcheck.soak.soak_report import FaultRecord, SoakReport

CYCLE_S = 0.01  # the live loop checks its watchdogs this often without frames
IMAGE_SIZE = (60, 80)  # the frozen-picture check's own size: nothing is lost by not rendering
NOISE_SIGMA = 1.8  # the demo camera's sensor noise, grey levels
LINK_KINDS = ("link_drop", "plc_freeze")
SEAM_S = 1.0  # no frames where the looped footage starts again


@dataclass
class _Active:
    planned: PlannedFault
    record: FaultRecord
    end_t_s: float


@dataclass
class _Scripted:
    """The detector the soak controls: the slot's answer, or unusable output."""

    keypoint_names: tuple[str, ...] = ("tip", "rear")
    answer: dict[str, tuple[float, float, float]] = field(default_factory=dict)
    unusable: bool = False

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        if self.unusable:
            raise ModelOutputError("soak: the model produced NaN or infinite output")
        points = tuple(
            Keypoint(name, *self.answer.get(name, (0.0, 0.0, 0.0))) for name in self.keypoint_names
        )
        return Keypoints(frame.index, frame.t_s, points)


class Soak:
    def __init__(self, footage: Footage, seed: int = 0, bound_ms: float = 100.0) -> None:
        self.f = footage
        self.plan = footage.plan
        self.bound_ms = bound_ms
        self.rng = random.Random(seed)
        self.faults = fault_stream(seed)
        camera = CameraShiftSettings()
        self.camera_detect_s = camera.interval_ms * camera.confirm_checks / 1000.0
        self.detector = _Scripted()
        self.failed: dict[str, tuple[PositionRef, ...]] = {}
        self.decisions = DecisionCore(self.plan, sinks=[self], rework_lookup=self._rework)
        self.judge = TruthJudge(footage.truth, self.plan)
        self.path = FramePath(
            self.plan,
            self.detector,
            self.decisions,
            [self.judge],
            picture_size=footage.picture_size,  # the stand-in images are smaller
        )
        noise = np.random.default_rng(seed)
        base = noise.integers(40, 215, (*IMAGE_SIZE, 3)).astype(np.float32)
        self.bank = [
            np.clip(np.round(base + noise.normal(0, NOISE_SIGMA, base.shape)), 0, 255).astype(
                np.uint8
            )
            for _ in range(61)
        ]
        self.black = np.zeros((*IMAGE_SIZE, 3), np.uint8)
        self.polygons = {zone.id: zone.polygon_px for zone in self.plan.zones}
        self.report = SoakReport(keypoints=footage.keypoints, bound_ms=bound_ms, seed=seed)
        self.enabled, self.off_since_t_s = False, -math.inf
        self.running_input = False
        self.stalled = False
        self.run_started_t_s = 0.0
        self.last_sequence = 0
        self.injected: list[Observation] = []
        self.held: list[Observation] = []
        self.active: _Active | None = None
        self.watching: FaultRecord | None = None
        self.pending: PlannedFault | None = None
        self.armed_t_s = 0.0
        self.last_frame_t_s = 0.0
        self.last_image = self.bank[0]
        self.last_answer: dict[str, tuple[float, float, float]] = {}
        self.frozen: tuple[np.ndarray, dict[str, tuple[float, float, float]]] = (
            self.last_image,
            {},
        )

    # -- the decision sink: every sequencer step
    def on_step(self, step: DecisionStep) -> None:
        out = step.output
        if self.enabled and not out.tool_enabled:
            self.off_since_t_s = out.t_s
        self.enabled = out.tool_enabled
        for event in step.events:
            if isinstance(event, ev.UnitEnded) and event.serial is not None:
                self.failed[event.serial] = event.failed_positions + event.unfinished_positions
            if (
                isinstance(event, ev.AlarmRaised)
                and event.code == "duplicate_result"
                and self.watching is not None
            ):
                self.watching.ignored = True
        self._check_inhibit(out.t_s)

    def on_stop(self, error: BaseException | None) -> None:
        """Nothing to make safe: the soak writes nothing."""

    def _rework(self, serial: str) -> tuple[PositionRef, ...]:
        return self.failed.get(serial, ())

    # -- the run
    def run(self, frames: int, progress: Callable[[int], None] | None = None) -> SoakReport:
        started = time.perf_counter()
        period_s = 1.0 / self.f.fps
        loop_s = self.f.frame_count * period_s + SEAM_S
        inputs = sorted(self.f.inputs, key=lambda o: o.t_s)
        next_input, loop = 0, 0
        self._arm(0.0)
        for slot in range(frames):
            source = slot % self.f.frame_count
            if source == 0 and slot > 0:
                loop, next_input = loop + 1, 0
                self._seam(loop * loop_s, period_s)
            t_s = loop * loop_s + source * period_s
            if self.stalled:  # the loop's watchdog cycles until this slot, before its inputs
                self._cycles(t_s - period_s, t_s)
            while next_input < len(inputs) and inputs[next_input].t_s + loop * loop_s <= t_s + 1e-4:
                self._station_input(
                    replace(inputs[next_input], t_s=inputs[next_input].t_s + loop * loop_s)
                )
                next_input += 1
            self._faults(t_s)
            self._apply_injected(t_s)
            self._slot(slot, source, t_s, period_s)
            self._judge(slot, source, t_s)
            if progress is not None and slot % 50_000 == 0:
                progress(slot)
        self.report.frames = frames
        self.report.wall_s = time.perf_counter() - started
        return self.report

    def _seam(self, t_s: float, period_s: float) -> None:
        """Where the footage starts again the tool would jump across the bench in one frame:
        the camera gives no frame for ``SEAM_S`` instead (not judged, not a fault)."""
        self._cycles(self.last_frame_t_s, t_s)

    def _cycles(self, from_t_s: float, to_t_s: float) -> None:
        """Ticks every ``CYCLE_S`` after ``from_t_s`` and before ``to_t_s``."""
        tick = from_t_s + CYCLE_S
        while tick < to_t_s - 1e-9:
            self.decisions.apply(Tick(tick))
            tick += CYCLE_S

    def _station_input(self, obs: Observation) -> None:
        kind = self.active.planned.kind if self.active is not None else ""
        if kind in LINK_KINDS:
            self.held.append(obs)  # a dead link delivers nothing until it is back
            return
        if isinstance(obs, ToolRunning):
            if obs.on and not self.running_input:
                self.run_started_t_s = obs.t_s
            self.running_input = obs.on
            if kind == "tool_running_stuck":
                return
        if isinstance(obs, TighteningResult) and obs.sequence is not None:
            self.last_sequence = obs.sequence
        self.decisions.apply(obs)

    def _apply_injected(self, t_s: float) -> None:
        due = sorted((o for o in self.injected if o.t_s <= t_s + 1e-9), key=lambda o: o.t_s)
        self.injected = [o for o in self.injected if o.t_s > t_s + 1e-9]
        for obs in due:
            self.decisions.apply(obs)

    # -- faults
    def _arm(self, t_s: float) -> None:
        self.pending = next(self.faults)
        self.armed_t_s = t_s + self.pending.gap_s

    def _faults(self, t_s: float) -> None:
        active = self.active
        if active is not None and t_s >= active.end_t_s:
            self._end(active, t_s)
        if self.active is None and self.pending is not None and t_s >= self.armed_t_s:
            trigger = self.pending.trigger
            ready = (
                trigger == "any"
                or (trigger == "enabled" and self.enabled)
                or (trigger == "running" and self.enabled and self.running_input)
            )
            if ready or t_s >= self.armed_t_s + TRIGGER_WAIT_S:
                self._start(self.pending, t_s)

    def _start(self, planned: PlannedFault, t_s: float) -> None:
        kind, end = planned.kind, t_s + planned.duration_ms / 1000.0
        stale_s = self.f.stale_frame_ms / 1000.0
        grace_s = self.plan.thresholds.lost_track_grace_ms / 1000.0
        detect: float | None = {
            "frozen_image": self.last_frame_t_s + stale_s,
            "stall": self.last_frame_t_s + stale_s,
            "black_frames": t_s + stale_s,
            "heavy_blur": t_s + grace_s,
            "tip_occluded": t_s + grace_s,
            "camera_moved": t_s + self.camera_detect_s,
            "nan_output": t_s,
            "link_drop": t_s,
            "plc_freeze": t_s + self.f.link_timeout_s,
            "result_repeated": None,
            "result_jump": t_s,
            "reset_during_run": t_s,
        }.get(kind)
        if kind == "tool_running_stuck":
            limit_s = self.plan.thresholds.max_run_ms / 1000.0
            started = self.run_started_t_s if self.running_input else t_s
            detect = started + limit_s if self.enabled else t_s
            if not self.running_input:
                self.injected.append(ToolRunning(t_s, True))
        elif kind == "link_drop":
            self.injected.append(LinkStatus(t_s, False))
        elif kind == "plc_freeze" and detect is not None and detect < end:
            self.injected.append(LinkStatus(detect, False))
        elif kind == "camera_moved" and detect is not None and detect < end:
            shift = math.hypot(*planned.shift_px)
            self.injected.append(CameraMoved(detect, True, shift))
        elif kind == "result_repeated":
            self.injected.append(TighteningResult(t_s, True, 5.0, 30.0, self.last_sequence))
        elif kind == "result_jump":
            self.last_sequence = (self.last_sequence + 7) & 0xFFFF
            self.injected.append(TighteningResult(t_s, False, 3.0, 50.0, self.last_sequence))
        elif kind == "reset_during_run":
            self.injected.append(Reset(t_s, "soak: reset during a run"))
        if detect is not None and detect > end and kind != "tool_running_stuck":
            detect = None
        record = FaultRecord(kind, t_s, end, detect, enabled_at_start=self.enabled)
        self.report.faults.append(record)
        self.active = _Active(planned, record, end)
        self.watching = record
        if kind == "frozen_image":
            self.frozen = (self.last_image, dict(self.last_answer))

    def _end(self, active: _Active, t_s: float) -> None:
        kind = active.planned.kind
        if (
            kind == "tool_running_stuck"
            and active.record.detect_t_s is not None
            and active.record.detect_t_s > active.end_t_s
        ):
            active.record.detect_t_s = None  # the run ended before its limit
        self.active = None
        if kind in LINK_KINDS:
            self.decisions.apply(LinkStatus(t_s, True))
            held, self.held = self.held, []
            for obs in held:
                self._station_input(replace(obs, t_s=t_s))
        if kind == "tool_running_stuck":
            self.injected.append(ToolRunning(t_s, self.running_input))
        if kind == "camera_moved" and active.record.detect_t_s is not None:
            back = self.judge.moved  # the footage's own camera state is what returns
            self.injected.append(CameraMoved(t_s + self.camera_detect_s, back, 0.0))
        active.record.ended = True
        self._arm(t_s)

    def _check_inhibit(self, t_s: float) -> None:
        record = self.watching
        if record is None or record.detect_t_s is None or record.inhibit_ms is not None:
            return
        if t_s + 1e-9 < record.detect_t_s:
            return
        if not self.enabled:
            record.inhibit_ms = max(0.0, (self.off_since_t_s - record.detect_t_s) * 1000.0)
            record.enabled_at_detect = self.off_since_t_s >= record.detect_t_s - 1e-9
        elif record.ended and t_s >= record.end_t_s:
            record.inhibit_ms = (t_s - record.detect_t_s) * 1000.0  # on through its end
            record.enabled_at_detect = True

    # -- one frame slot
    def _slot(self, slot: int, source: int, t_s: float, period_s: float) -> None:
        kind = self.active.planned.kind if self.active is not None else ""
        if kind == "stall" and not self.stalled:  # from the last frame on
            self._cycles(t_s - period_s, t_s)
        self.stalled = kind == "stall"
        if self.stalled:
            self.decisions.apply(Tick(t_s))
            return
        answer = dict(self.f.answers.get(source, {}))
        image = self.bank[slot % len(self.bank)]
        self.detector.unusable = kind == "nan_output"
        if kind == "frozen_image":
            image, answer = self.frozen
        elif kind == "black_frames":
            image, answer = self.black, {}
        elif kind == "heavy_blur" and "tip" in answer:
            x, y, score = answer["tip"]
            answer["tip"] = (x + self.rng.gauss(0, 4.0), y + self.rng.gauss(0, 4.0), score * 0.3)
        elif kind == "tip_occluded" and "tip" in answer:
            x, y, _ = answer["tip"]
            answer["tip"] = (x, y, 0.0)
        elif kind == "camera_moved":
            dx, dy = self.active.planned.shift_px if self.active is not None else (0.0, 0.0)
            answer = {n: (x + dx, y + dy, s) for n, (x, y, s) in answer.items()}
        self.detector.answer = answer
        self.path.process(Frame(source, t_s, image))
        if kind != "frozen_image":
            self.last_image, self.last_answer = image, answer
        self.last_frame_t_s = t_s

    def _judge(self, slot: int, source: int, t_s: float) -> None:
        self.report.enabled_frames += int(self.enabled)
        if not self.enabled:
            return
        out = self.decisions.last_output
        target = out.target.zone if out is not None and out.target is not None else None
        if truly_at_target(
            self.f.truth.rows.get(source),
            self.polygons.get(target or ""),
            self.plan.thresholds.hysteresis_px,
        ):
            return
        record = self.active.record if self.active is not None else None
        if record is not None and (
            record.detect_t_s is None or t_s <= record.detect_t_s + self.bound_ms / 1000.0
        ):
            self.report.enabled_in_fault_window += 1
            return
        self.report.false_enables += 1
        kinds: Any = record.kind if record is not None else "none"
        self.report.false_enable_frames.append((slot, kinds))
