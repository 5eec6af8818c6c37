"""Dry run: a few seconds of a recorded video through the real frame path (detector, tracker,
zones, image judgements, sequencer) with the config as edited, drawn by the replay overlay.

Frames are kept as JPEGs in memory for the page to play; nothing is written to disk (no step
log file, no video), so a dry run leaves no trace beside the config.
"""

from __future__ import annotations

import itertools
import logging
import threading
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import cv2

from stationcheck.config import StationConfig, check_data
from stationcheck.core import event_kinds as ev
from stationcheck.core.events import Event
from stationcheck.core.observations import Observation, PictureState, UnitStarted
from stationcheck.core.plan import StationPlan
from stationcheck.errors import InputFileError
from stationcheck.overlay.annotator import Annotator
from stationcheck.overlay.station_view import StationViewBuilder
from stationcheck.pipeline.decision_core import DecisionCore, DecisionStep
from stationcheck.pipeline.frame_path import FrameResult
from stationcheck.web.server import WebError

log = logging.getLogger(__name__)

MAX_SECONDS = 20.0
MAX_LEAD_IN_S = 60.0
JPEG_QUALITY = 80
_EVENT_KEYS = ("attempt", "result", "code", "subject", "reason", "verdict", "released")


@dataclass(frozen=True)
class DryRunRequest:
    video: Path
    inputs: Path | None
    start_s: float
    seconds: float
    every: int = 2  # draw every n-th frame


@dataclass
class DryRunRecorder:
    """Step sink and frame sink: draws frames to JPEG and notes what the sequencer decided."""

    plan: StationPlan
    every: int
    annotator: Annotator = field(init=False)
    views: StationViewBuilder = field(init=False)
    frames: list[bytes] = field(default_factory=list)
    frame_times_s: list[float] = field(default_factory=list)
    timeline: list[dict[str, Any]] = field(default_factory=list)
    draw_from_s: float = 0.0
    run_frames: int = 0  # every frame of the segment (``frames`` holds every n-th)
    enabled_frames: int = 0
    _enabled: bool | None = None

    def __post_init__(self) -> None:
        self.annotator = Annotator(self.plan, "stationcheck setup: dry run")
        self.views = StationViewBuilder(self.plan)

    def on_step(self, step: DecisionStep) -> None:
        self.views.fold(step.events)
        if isinstance(step.observation, PictureState):
            self.timeline.append(describe_picture(step.observation))
        for event in step.events:
            if not isinstance(event, ev.PictureQuality):  # said once above, with or without a unit
                self.timeline.append(describe_event(event))
        if step.output.tool_enabled != self._enabled:
            self._enabled = step.output.tool_enabled
            words = "on" if self._enabled else f"off ({step.output.enable_reason})"
            self.timeline.append(
                {"t_s": round(step.output.t_s, 3), "kind": "enable", "text": f"tool enable {words}"}
            )

    def on_frame(self, result: FrameResult) -> None:
        if result.sighting.frame.t_s < self.draw_from_s - 1e-6:
            return
        self.run_frames += 1
        self.enabled_frames += int(result.output.tool_enabled)
        if result.sighting.frame.index % self.every:
            return
        pose = result.sighting.pose
        view = self.views.view(
            result.output,
            frame_index=result.sighting.frame.index,
            t_s=result.sighting.frame.t_s,
            tip_px=pose.tip_px,
            rear_px=pose.rear_px,
            tip_seen=pose.seen,
        )
        canvas = self.annotator.annotate(result.sighting.frame.image, view)
        ok, encoded = cv2.imencode(".jpg", canvas, [cv2.IMWRITE_JPEG_QUALITY, JPEG_QUALITY])
        if not ok:
            raise InputFileError("cannot encode a dry-run frame as JPEG")
        self.frames.append(encoded.tobytes())
        self.frame_times_s.append(result.sighting.frame.t_s)

    def on_stop(self, error: BaseException | None) -> None:
        if error is not None:
            self.timeline.append({"t_s": None, "kind": "stopped", "text": f"stopped: {error}"})


def describe_picture(obs: PictureState) -> dict[str, Any]:
    """The camera picture's figures in the timeline, and whether the checks can judge it."""
    if not obs.camera_checkable:
        verdict = f"too poor to check the camera ({obs.reason})"
    elif not obs.judgeable:
        verdict = f"cannot judge bins and checks ({obs.reason})"
    else:
        verdict = "good enough to judge"
    text = (
        f"picture {verdict}: brightness {obs.brightness:.0f}, contrast {obs.contrast:.0f}, "
        f"noise {obs.noise_sigma:.1f}, sharpness {obs.sharpness:.0f}, "
        f"blockiness {obs.blockiness:.2f}"
    )
    return {"t_s": round(obs.t_s, 3), "kind": "picture", "text": text}


def describe_event(event: Event) -> dict[str, Any]:
    """One timeline line: the fastener by its zone, its place in the step as "order N", and
    only the details that have a value."""

    def value_of(name: str) -> Any:
        return getattr(event, name, None)

    details: list[str] = []
    if _has_value(value_of("zone")):
        details.append(str(value_of("zone")))
    if _has_value(value_of("position")):
        of_step = f" of step {value_of('step')}" if _has_value(value_of("step")) else ""
        details.append(f"order {value_of('position')}{of_step}")
    elif _has_value(value_of("step")):
        details.append(f"step {value_of('step')}")
    details += [f"{key} {value_of(key)}" for key in _EVENT_KEYS if _has_value(value_of(key))]
    serial = f"{event.serial}: " if event.serial else ""
    text = f"{serial}{event.kind.replace('_', ' ')}"
    if details:
        text += " (" + ", ".join(details) + ")"
    return {"t_s": round(event.t_s, 3), "kind": event.kind, "text": text}


def _has_value(value: Any) -> bool:
    return value is not None and value != "" and value != () and value != []


def usable_config(data: dict[str, Any], base_dir: Path) -> StationConfig:
    result = check_data(data, base_dir=base_dir)
    if result.config is None:
        first = result.errors[0]
        raise WebError(
            400,
            f"fix the config first ({len(result.errors)} error(s)); "
            f"{first.path_text}: {first.message}",
        )
    return result.config


def run_dry(config: StationConfig, request: DryRunRequest) -> DryRunRecorder:
    """Runs the segment and returns the drawn frames and the decisions.

    Raises:
        InputFileError: the video, the inputs or the reference frame cannot be read.
        ModelError: the model cannot be loaded.
    """
    from stationcheck.judgements.station import StationJudgements
    from stationcheck.pipeline.frame_loop import run_loop
    from stationcheck.pipeline.frame_path import FramePath
    from stationcheck.pipeline.judging import StationImageJudge
    from stationcheck.pipeline.log_sink import StepLogSink, rework_positions_from_log
    from stationcheck.pipeline.model_identity import with_model_identity
    from stationcheck.pipeline.station_inputs import InputSchedule, read_station_inputs
    from stationcheck.sources.video_file import VideoFileSource
    from stationcheck.store.memory_log import MemoryStepLog
    from stationcheck.vision.detector import load_detector

    plan = config.to_plan()
    inputs = read_station_inputs(request.inputs) if request.inputs is not None else ()
    probe = VideoFileSource(request.video, max_frames=1)
    fps = probe.fps
    probe.close()
    from_s = lead_in_start_s(inputs, request.start_s)
    first_frame = round(from_s * fps)
    source = VideoFileSource(
        request.video,
        first_frame=first_frame,
        max_frames=max(1, round((request.start_s + request.seconds - from_s) * fps)),
    )
    try:
        detector = load_detector(config.model_path, threads=config.model.threads)
        plan = with_model_identity(plan, detector)
        judges = [StationImageJudge(StationJudgements.from_config(config))]
        step_log = MemoryStepLog()
        recorder = DryRunRecorder(plan, request.every, draw_from_s=request.start_s)
        decisions = DecisionCore(
            plan,
            rework_lookup=lambda serial: rework_positions_from_log(step_log, serial),
            sinks=[StepLogSink(step_log), recorder],
        )
        schedule = InputSchedule(inputs)
        schedule.skip_before(first_frame / fps)
        run_loop(source, FramePath(plan, detector, decisions, judges), schedule, [recorder])
    finally:
        source.close()
    log.info("dry run: %d frames drawn from %s", len(recorder.frames), request.video)
    return recorder


def lead_in_start_s(inputs: Sequence[Observation], start_s: float) -> float:
    """Where to start the sequencer so the unit open at ``start_s`` is open in the dry run too:
    the last unit start at or before it (at most ``MAX_LEAD_IN_S`` earlier)."""
    starts = [o.t_s for o in inputs if isinstance(o, UnitStarted) and o.t_s <= start_s]
    if not starts or start_s - max(starts) > MAX_LEAD_IN_S:
        return start_s
    return max(starts)


def inputs_beside(video: Path) -> Path | None:
    """``x.mp4`` -> ``x_inputs.jsonl`` beside it, the replay's station-inputs sidecar."""
    candidate = video.with_name(f"{video.stem}_inputs.jsonl")
    return candidate if candidate.is_file() else None


@dataclass
class DryRunStore:
    """The last few dry runs' frames, for the page to fetch one by one."""

    keep: int = 2
    runs: dict[int, list[bytes]] = field(default_factory=dict)
    _ids: itertools.count[int] = field(default_factory=lambda: itertools.count(1))
    _lock: threading.Lock = field(default_factory=threading.Lock)

    def add(self, frames: list[bytes]) -> int:
        with self._lock:
            run_id = next(self._ids)
            self.runs[run_id] = frames
            for old in sorted(self.runs)[: -self.keep]:
                del self.runs[old]
            return run_id

    def frame(self, run_id: int, index: int) -> bytes:
        with self._lock:
            frames = self.runs.get(run_id)
            if frames is None:
                raise WebError(404, f"no dry run {run_id} (start a new one)")
            if not 0 <= index < len(frames):
                raise WebError(404, f"dry run {run_id} has no frame {index}")
            return frames[index]
