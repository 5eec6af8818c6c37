"""The per-frame path: detector -> tracker -> zones -> sequencer, then image judgements ->
sequencer.

The zone observation is decided first and handed to ``on_decided`` (the live loop sends the
tool enable from there), so the image judgements' time never delays the enable signal.

Two ways to drive it. :meth:`FramePath.process` takes one frame from start to end. The loops
use three calls instead, so that a frame's image judgements run on a second thread while the
next frame is in the detector: :meth:`~FramePath.sight` (detector, tracker, zones: no decision
yet), :meth:`~FramePath.settle` (waits for the previous frame's judgements and decides what they
found, giving that frame's :class:`FrameResult`), then :meth:`~FramePath.decide` (the zone
observation, then the judgements start). The sequencer sees the same observations in the same
order either way: a frame's zone observation, its judgements', whatever the caller applies
between frames, the next frame's zone observation. Only the decision steps ever touch the
sequencer, always on the caller's thread.

:class:`FramePath` holds the tracker and zone states for the caller's loop and hands every
observation to a :class:`~stationcheck.pipeline.decision_core.DecisionCore`. It does not know where
frames come from or where outputs go (:mod:`~stationcheck.pipeline.frame_loop` drives it for
replay and live alike). One record per stage boundary leaves it: a :class:`Sighting` (what the
detector, tracker and zones saw) and a :class:`FrameResult` (that sighting with the steps the
sequencer took for it); the later holds the earlier, nothing is copied. ``model_file`` names
the model behind the detector (see ``docs/frame-path.md``).

A detector that raises on a frame becomes a ``DetectorFault`` observation (the tool is
inhibited); after ``max_detector_faults`` unexpected failures in a row the path gives up with a
:class:`~stationcheck.errors.ModelError`. Unusable model output (NaN, infinite, all zero) is a
``DetectorFault`` on every frame it happens and never ends the run. Each frame's picture is also
compared with the last one (:mod:`~stationcheck.vision.frozen_image`): how long it has not
changed goes to the sequencer as the zone observation's ``frozen_ms``.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, replace
from pathlib import Path

from stationcheck.core.observations import DetectorFault, Observation, ZoneObservation
from stationcheck.core.outputs import Output
from stationcheck.core.plan import StationPlan
from stationcheck.core.records import Frame, Keypoints, ToolPose
from stationcheck.core.tracker import Tracker, TrackerSettings, TrackerState
from stationcheck.core.zones import ZoneMap, ZoneVisit
from stationcheck.errors import ModelError, ModelOutputError, StationcheckError
from stationcheck.pipeline.decision_core import DecisionCore, DecisionStep
from stationcheck.pipeline.judging import ImageJudge
from stationcheck.vision.detector import KeypointDetector
from stationcheck.vision.frozen_image import FrozenImageWatch

logger = logging.getLogger(__name__)

DEFAULT_MAX_DETECTOR_FAULTS = 30


@dataclass(frozen=True)
class Sighting:
    """Seen: one frame as the detector, tracker and zones saw it; nothing is decided yet."""

    frame: Frame
    keypoints: Keypoints | None  # None when the detector failed on this frame
    fault: DetectorFault | None
    pose: ToolPose
    zone: ZoneObservation
    detect_ms: float = 0.0
    track_ms: float = 0.0


@dataclass(frozen=True)
class FrameResult:
    """Frame done: what the sequencer decided for one sighting (its zone observation's step,
    then the image judgements' steps). The frame sinks (annotated video, operator screen)
    draw from it; what the sequencer wrote is in each step's events."""

    sighting: Sighting
    steps: tuple[DecisionStep, ...]
    judge_ms: float = 0.0
    decide_ms: float = 0.0

    def __post_init__(self) -> None:
        if not self.steps:
            raise ValueError("a FrameResult needs at least the zone observation's step, got none")

    @property
    def output(self) -> Output:
        """The frame's last output: after its judgements' findings."""
        return self.steps[-1].output


def model_file_of(detector: object) -> Path | None:
    """The model file behind a detector: the coarse model of the ONNX detector, None for a
    detector that answers from a table. A run's record of which model decided its units (the
    model file's hash) starts from here."""
    path = getattr(getattr(detector, "coarse", None), "path", None)
    return Path(path) if path is not None else None


class FramePath:
    def __init__(
        self,
        plan: StationPlan,
        detector: KeypointDetector,
        decisions: DecisionCore,
        judges: Sequence[ImageJudge] = (),
        *,
        tracker_settings: TrackerSettings | None = None,
        max_detector_faults: int = DEFAULT_MAX_DETECTOR_FAULTS,
        picture_size: tuple[int, int] | None = None,
    ) -> None:
        """``picture_size``: the (width, height) of the camera picture the keypoints are in, for
        the tracker's edge band; None takes each frame's own image size (a caller that passes
        stand-in images smaller than the camera's says the real size here)."""
        self.plan = plan
        self.detector = detector
        self.decisions = decisions
        self.judges = tuple(judges)
        self.tracker = Tracker(tracker_settings or TrackerSettings.from_thresholds(plan.thresholds))
        self.zone_map = ZoneMap.from_plan(plan)
        self.tracker_state: TrackerState = self.tracker.initial_state()
        self.visit: ZoneVisit = self.zone_map.initial_state()
        self.max_detector_faults = max_detector_faults
        self.picture_size = picture_size
        self.faults_in_a_row = 0
        self.unusable_in_a_row = 0
        self.last_pose: ToolPose | None = None
        self.model_file = model_file_of(detector)
        self.on_decided: Callable[[Output], None] | None = None
        # the decided frame whose judgements' findings are not decided yet, and those judgements
        self._pending: tuple[FrameResult, Future[tuple[list[Observation], float]] | None] | None = (
            None
        )
        self._executor: ThreadPoolExecutor | None = None
        self.frozen_image = FrozenImageWatch()

    def process(self, frame: Frame, frame_age_ms: float = 0.0) -> FrameResult:
        """One frame from start to end, judgements included, on the caller's thread."""
        self.decide(self.sight(frame, frame_age_ms), judge_now=True)
        result = self.settle()
        assert result is not None
        return result

    def sight(self, frame: Frame, frame_age_ms: float = 0.0) -> Sighting:
        """What the detector, tracker and zones make of ``frame``; decides nothing."""
        t0 = time.perf_counter()
        keypoints, fault = self._detect(frame)
        t1 = time.perf_counter()
        if keypoints is None:
            keypoints_for_tracker = Keypoints(frame.index, frame.t_s, ())
        else:
            keypoints_for_tracker = keypoints
        height, width = frame.image.shape[:2]
        self.tracker_state, pose = self.tracker.update(
            self.tracker_state, keypoints_for_tracker, self.picture_size or (width, height)
        )
        self.visit, zone_obs = self.zone_map.observe(self.visit, pose, frame_age_ms)
        frozen_ms = self.frozen_image.see(frame, frame.source_t_s)
        if frozen_ms > 0.0:
            zone_obs = replace(zone_obs, frozen_ms=frozen_ms)
        self.last_pose = pose
        t2 = time.perf_counter()
        return Sighting(
            frame,
            keypoints,
            fault,
            pose,
            zone_obs,
            detect_ms=(t1 - t0) * 1e3,
            track_ms=(t2 - t1) * 1e3,
        )

    def decide(self, sighting: Sighting, judge_now: bool = False) -> None:
        """Steps the sighting's zone observation (or detector fault), hands the output to
        ``on_decided``, then starts the frame's image judgements: on the judging thread, or
        at :meth:`settle` with ``judge_now``. Call :meth:`settle` first if a frame is pending."""
        if self._pending is not None:
            raise RuntimeError("settle the previous frame before deciding the next")
        t0 = time.perf_counter()
        first = self.decisions.apply(sighting.fault or sighting.zone)
        if self.on_decided is not None:
            self.on_decided(first.output)
        decided = FrameResult(sighting, (first,), decide_ms=(time.perf_counter() - t0) * 1e3)
        judged = None
        if self.judges and not judge_now:
            judged = self._judging_thread().submit(
                self._judge, sighting.frame, sighting.pose, first.output
            )
        self._pending = (decided, judged)

    def settle(self) -> FrameResult | None:
        """The last decided frame's result once its judgements' findings are decided (None
        when no frame is pending). Re-raises what a judgement raised."""
        pending, self._pending = self._pending, None
        if pending is None:
            return None
        decided, judging = pending
        sighting, first = decided.sighting, decided.steps[0]
        if judging is not None:
            judged, judge_ms = judging.result()
        else:
            judged, judge_ms = self._judge(sighting.frame, sighting.pose, first.output)
        if not judged:
            return replace(decided, judge_ms=judge_ms)
        t0 = time.perf_counter()
        steps = [first] + [self.decisions.apply(observation) for observation in judged]
        return replace(
            decided,
            steps=tuple(steps),
            judge_ms=judge_ms,
            decide_ms=decided.decide_ms + (time.perf_counter() - t0) * 1e3,
        )

    def close(self) -> None:
        """Stops the judging thread (a pending frame's judgements finish first)."""
        if self._executor is not None:
            self._executor.shutdown(wait=True)
            self._executor = None

    def _judging_thread(self) -> ThreadPoolExecutor:
        if self._executor is None:
            self._executor = ThreadPoolExecutor(max_workers=1, thread_name_prefix="judging")
        return self._executor

    def _judge(
        self, frame: Frame, pose: ToolPose, output: Output
    ) -> tuple[list[Observation], float]:
        t0 = time.perf_counter()
        judged: list[Observation] = []
        for judge in self.judges:
            judged.extend(judge.judge(frame, pose, output))
        return judged, (time.perf_counter() - t0) * 1e3

    def _detect(self, frame: Frame) -> tuple[Keypoints | None, DetectorFault | None]:
        hint = self.last_pose.tip_px if self.last_pose is not None else None
        try:
            keypoints = self.detector.detect(frame, hint)
        except ModelOutputError as exc:
            if self.unusable_in_a_row == 0:
                logger.warning("frame %d: %s; tool inhibited", frame.index, exc)
            self.unusable_in_a_row += 1
            return None, DetectorFault(t_s=frame.t_s, reason=str(exc)[:200])
        except StationcheckError:
            raise
        except Exception as exc:
            self.faults_in_a_row += 1
            reason = f"{type(exc).__name__}: {exc}".splitlines()[0][:200]
            logger.warning("frame %d: detector failed (%s)", frame.index, reason)
            if self.faults_in_a_row >= self.max_detector_faults:
                raise ModelError(
                    f"the keypoint detector failed on {self.faults_in_a_row} frames in a row "
                    f"(last at frame {frame.index}: {reason})"
                ) from exc
            return None, DetectorFault(t_s=frame.t_s, reason=reason)
        if self.unusable_in_a_row:
            logger.info("model output usable again after %d frames", self.unusable_in_a_row)
        self.faults_in_a_row = self.unusable_in_a_row = 0
        return keypoints, None
