"""The per-frame path: detector -> tracker -> zones -> sequencer, then image judgements ->
sequencer.

The zone observation is decided first and handed to ``on_decided`` (the live loop sends the
tool enable from there), so the image judgements' time never delays the enable signal; what
they find is decided right after, in the same frame, and a change it makes (camera moved:
inhibit) goes out at the end of the same cycle.

:class:`FramePath` holds the tracker and zone states for the caller's loop and hands every
observation to a :class:`~stationcheck.pipeline.decisions.DecisionCore`. It does not know where
frames come from or where outputs go.

A detector that raises on a frame becomes a ``DetectorFault`` observation (the tool is
inhibited); after ``max_detector_faults`` failures in a row the path gives up with a
:class:`~stationcheck.errors.ModelError`.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from stationcheck.core.observations import DetectorFault, Observation, ZoneObservation
from stationcheck.core.outputs import Output
from stationcheck.core.plan import StationPlan
from stationcheck.core.records import Frame, Keypoints, ToolPose
from stationcheck.core.tracker import Tracker, TrackerSettings, TrackerState
from stationcheck.core.zones import ZoneMap, ZoneVisit
from stationcheck.errors import ModelError, StationcheckError
from stationcheck.pipeline.decisions import DecisionCore, DecisionStep
from stationcheck.pipeline.judging import ImageJudge
from stationcheck.vision.detector import KeypointDetector

logger = logging.getLogger(__name__)

DEFAULT_MAX_DETECTOR_FAULTS = 30


@dataclass(frozen=True)
class StageTimes:
    """Wall time per stage for one frame, in milliseconds."""

    detect_ms: float = 0.0
    track_ms: float = 0.0
    judge_ms: float = 0.0
    decide_ms: float = 0.0


@dataclass(frozen=True)
class FrameResult:
    """What one frame produced; the overlay and the operator screen draw from it."""

    frame: Frame
    keypoints: Keypoints | None  # None when the detector failed on this frame
    pose: ToolPose
    zone: ZoneObservation
    steps: tuple[DecisionStep, ...]  # the zone observation's step, then the judgements'
    output: Output
    times: StageTimes


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
    ) -> None:
        self.plan = plan
        self.detector = detector
        self.decisions = decisions
        self.judges = tuple(judges)
        self.tracker = Tracker(tracker_settings or TrackerSettings.from_thresholds(plan.thresholds))
        self.zone_map = ZoneMap.from_plan(plan)
        self.tracker_state: TrackerState = self.tracker.initial_state()
        self.visit: ZoneVisit = self.zone_map.initial_state()
        self.max_detector_faults = max_detector_faults
        self.faults_in_a_row = 0
        self.last_pose: ToolPose | None = None
        self.on_decided: Callable[[Output], None] | None = None

    def process(self, frame: Frame, frame_age_ms: float = 0.0) -> FrameResult:
        t0 = time.perf_counter()
        keypoints, fault = self._detect(frame)
        t1 = time.perf_counter()
        if keypoints is None:
            keypoints_for_tracker = Keypoints(frame.index, frame.t_s, ())
        else:
            keypoints_for_tracker = keypoints
        self.tracker_state, pose = self.tracker.update(self.tracker_state, keypoints_for_tracker)
        self.visit, zone_obs = self.zone_map.observe(self.visit, pose, frame_age_ms)
        t2 = time.perf_counter()
        first = self.decisions.apply(fault if fault is not None else zone_obs)
        if self.on_decided is not None:
            self.on_decided(first.output)
        t3 = time.perf_counter()
        judged: list[Observation] = []
        for judge in self.judges:
            judged.extend(judge.judge(frame, pose, first.output))
        t4 = time.perf_counter()
        steps = [first] + [self.decisions.apply(observation) for observation in judged]
        t5 = time.perf_counter()
        self.last_pose = pose
        return FrameResult(
            frame=frame,
            keypoints=keypoints,
            pose=pose,
            zone=zone_obs,
            steps=tuple(steps),
            output=steps[-1].output,
            times=StageTimes(
                detect_ms=(t1 - t0) * 1e3,
                track_ms=(t2 - t1) * 1e3,
                judge_ms=(t4 - t3) * 1e3,
                decide_ms=(t3 - t2 + t5 - t4) * 1e3,
            ),
        )

    def _detect(self, frame: Frame) -> tuple[Keypoints | None, DetectorFault | None]:
        hint = self.last_pose.tip_px if self.last_pose is not None else None
        try:
            keypoints = self.detector.detect(frame, hint)
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
        self.faults_in_a_row = 0
        return keypoints, None
