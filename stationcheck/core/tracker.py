"""Turns per-frame keypoints into a smoothed tool pose with a visibility verdict.

Rules:
- A keypoint below ``min_score`` is not seen. The tool is seen when its tip is seen.
- A tip within ``edge_band_px`` of the picture's border is not seen: a point on the border
  cannot be told from one just beyond it, so a tool leaving the picture nose first counts as
  gone (towards inhibit) instead of being held by a tip drawn on the edge.
- Seen tips are smoothed with the One Euro filter on frame timestamps (tip and rear separately).
- When the tip is not seen, the last smoothed pose is held for ``lost_track_grace_ms``; after that
  the tool is not visible and the filters start afresh on the next sighting (no smoothing across
  a loss, so a tool that reappears elsewhere is not dragged from its old place).
- Jump gate: a tip that would have moved faster than ``max_speed_px_s`` since it was last seen
  counts as not seen for that frame (gross detector errors such as tip/rear swaps). If the tool
  really moved that fast, the track is lost after the grace period and restarts at the new place.
  ``None`` turns the gate off.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field, replace

from stationcheck.core.filters import OneEuroSettings, PointFilterState, filter_point
from stationcheck.core.plan import Thresholds
from stationcheck.core.records import Keypoint, Keypoints, ToolPose
from stationcheck.core.timing import elapsed_ms, exceeded
from stationcheck.core.validation import require_at_least, require_text

logger = logging.getLogger(__name__)

PICTURE_EDGE_BAND_PX = 4.0  # common practice, no source: a few pixels, more than a tip's error


def at_picture_edge(
    x_px: float, y_px: float, size: tuple[int, int], band_px: float = PICTURE_EDGE_BAND_PX
) -> bool:
    """True when (x, y) lies within ``band_px`` of the border of a ``size`` = (width, height)
    picture, or outside it."""
    width, height = size
    return (
        x_px < band_px
        or y_px < band_px
        or x_px > width - 1 - band_px
        or y_px > height - 1 - band_px
    )


@dataclass(frozen=True)
class TrackerSettings:
    min_score: float = 0.5
    lost_track_grace_ms: float = 300.0
    tip_name: str = "tip"
    rear_name: str = "rear"
    smoothing: OneEuroSettings = field(default_factory=OneEuroSettings)
    max_speed_px_s: float | None = 4000.0
    edge_band_px: float = PICTURE_EDGE_BAND_PX

    def __post_init__(self) -> None:
        require_at_least("TrackerSettings", "min_score", self.min_score, 0.0)
        require_at_least("TrackerSettings", "edge_band_px", self.edge_band_px, 0.0)
        if self.min_score > 1.0:
            raise ValueError(f"TrackerSettings.min_score must be <= 1, got {self.min_score}")
        require_at_least("TrackerSettings", "lost_track_grace_ms", self.lost_track_grace_ms, 0.0)
        require_text("TrackerSettings", "tip_name", self.tip_name)
        require_text("TrackerSettings", "rear_name", self.rear_name)
        if self.max_speed_px_s is not None:
            require_at_least("TrackerSettings", "max_speed_px_s", self.max_speed_px_s, 1e-9)

    @classmethod
    def from_thresholds(cls, thresholds: Thresholds) -> TrackerSettings:
        return cls(
            min_score=thresholds.min_score, lost_track_grace_ms=thresholds.lost_track_grace_ms
        )


@dataclass(frozen=True)
class TrackerState:
    tip: PointFilterState | None = None
    rear: PointFilterState | None = None
    last_seen_t_s: float | None = None
    track_started_t_s: float | None = None


class Tracker:
    """Pure: :meth:`update` maps (state, keypoints) to (next state, pose) and keeps nothing."""

    def __init__(self, settings: TrackerSettings) -> None:
        self.settings = settings

    def initial_state(self) -> TrackerState:
        return TrackerState()

    def update(
        self,
        state: TrackerState,
        keypoints: Keypoints,
        picture_size: tuple[int, int] | None = None,
    ) -> tuple[TrackerState, ToolPose]:
        """``picture_size`` (width, height) turns on the edge band; None leaves it off."""
        t_s = keypoints.t_s
        tip = self._seen(keypoints, self.settings.tip_name)
        if (
            tip is not None
            and picture_size is not None
            and at_picture_edge(tip.x_px, tip.y_px, picture_size, self.settings.edge_band_px)
        ):
            logger.debug("frame %d: tip on the picture's edge band", keypoints.frame_index)
            tip = None
        if tip is not None and self._implausible_jump(state, tip, t_s):
            logger.debug("frame %d: tip jump rejected by the speed gate", keypoints.frame_index)
            tip = None
        if tip is not None:
            state = self._follow(state, keypoints, tip, t_s)
            return state, self._pose(
                state, keypoints, seen=True, score=tip.score, measured_tip_px=(tip.x_px, tip.y_px)
            )
        grace_ms = self.settings.lost_track_grace_ms
        if (
            state.tip is not None
            and state.last_seen_t_s is not None
            and not exceeded(elapsed_ms(state.last_seen_t_s, t_s), grace_ms)
        ):
            return state, self._pose(state, keypoints, seen=False, score=0.0)
        lost = TrackerState()
        return lost, ToolPose(
            t_s=t_s,
            frame_index=keypoints.frame_index,
            tip_px=None,
            rear_px=None,
            visible=False,
            seen=False,
            score=0.0,
        )

    def _seen(self, keypoints: Keypoints, name: str) -> Keypoint | None:
        point = keypoints.get(name)
        if point is None or point.score < self.settings.min_score:
            return None
        return point

    def _implausible_jump(self, state: TrackerState, tip: Keypoint, t_s: float) -> bool:
        limit = self.settings.max_speed_px_s
        if limit is None or state.tip is None or state.last_seen_t_s is None:
            return False
        elapsed_s = t_s - state.last_seen_t_s
        if elapsed_s <= 0.0:
            return False
        x_px, y_px = state.tip.point_px
        return math.hypot(tip.x_px - x_px, tip.y_px - y_px) / elapsed_s > limit

    def _follow(
        self, state: TrackerState, keypoints: Keypoints, tip: Keypoint, t_s: float
    ) -> TrackerState:
        smoothing = self.settings.smoothing
        started = state.track_started_t_s if state.tip is not None else t_s
        rear_state = state.rear if state.tip is not None else None
        rear = self._seen(keypoints, self.settings.rear_name)
        if rear is not None:
            rear_state = filter_point(rear_state, (rear.x_px, rear.y_px), t_s, smoothing)
        return replace(
            state,
            tip=filter_point(state.tip, (tip.x_px, tip.y_px), t_s, smoothing),
            rear=rear_state,
            last_seen_t_s=t_s,
            track_started_t_s=started,
        )

    def _pose(
        self,
        state: TrackerState,
        keypoints: Keypoints,
        *,
        seen: bool,
        score: float,
        measured_tip_px: tuple[float, float] | None = None,
    ) -> ToolPose:
        assert state.tip is not None and state.last_seen_t_s is not None
        started = state.track_started_t_s if state.track_started_t_s is not None else keypoints.t_s
        return ToolPose(
            t_s=keypoints.t_s,
            frame_index=keypoints.frame_index,
            tip_px=state.tip.point_px,
            rear_px=state.rear.point_px if state.rear is not None else None,
            visible=True,
            seen=seen,
            score=score,
            track_age_s=max(0.0, keypoints.t_s - started),
            unseen_ms=0.0 if seen else max(0.0, elapsed_ms(state.last_seen_t_s, keypoints.t_s)),
            measured_tip_px=measured_tip_px,
        )
