"""Human-like motion of the operator's hand: minimum-jerk reaches with a small overshoot that
settles, holds with a little tremor, and the twitch of the tool's reaction torque.

Times are in whole frames so every event of the sample video falls on a frame.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from stationcheck.demo_station.shading import Point

SegmentKind = Literal["move", "hold", "run"]
TREMOR_PX = 0.35


@dataclass(frozen=True)
class Waypoint:
    tip_px: Point
    lift_px: float = 0.0
    bias_rad: float = 0.0  # turn of the tool away from the forearm's line


@dataclass(frozen=True)
class Segment:
    start_frame: int
    end_frame: int  # exclusive of the next segment's first frame; equal for an instant
    start: Waypoint
    end: Waypoint
    kind: SegmentKind
    hop_px: float = 0.0
    overshoot_px: float = 0.0


def minimum_jerk(u: float) -> float:
    """Position profile of a minimum-jerk reach, 0 at u=0 and 1 at u=1, with zero velocity
    and acceleration at both ends (Flash & Hogan 1985)."""
    u = min(1.0, max(0.0, u))
    return u * u * u * (10.0 - 15.0 * u + 6.0 * u * u)


class Track:
    """A chain of segments from one waypoint to the next, sampled per frame."""

    def __init__(self, start: Waypoint, fps: float, seed: int) -> None:
        self.fps = fps
        self._segments: list[Segment] = []
        self._starts: list[int] = []
        self._last = start
        self._frame = 0
        rng = np.random.default_rng(seed)
        self._tremor = rng.uniform(0, 2 * math.pi, (2, 3))
        self._tremor_hz = np.asarray([1.3, 3.1, 7.7])

    @property
    def frame(self) -> int:
        return self._frame

    @property
    def last(self) -> Waypoint:
        return self._last

    def frames(self, seconds: float) -> int:
        return max(1, round(seconds * self.fps))

    def move(
        self, to: Waypoint, seconds: float, hop_px: float = 0.0, overshoot: bool = True
    ) -> int:
        """Reach ``to``; returns the frame where the reach ends."""
        dist = math.dist(self._last.tip_px, to.tip_px)
        over = min(4.0, 0.035 * dist) if overshoot else 0.0
        return self._add(to, self.frames(seconds), "move", hop_px, over)

    def hold(self, seconds: float, kind: SegmentKind = "hold") -> int:
        return self._add(self._last, self.frames(seconds), kind)

    def hold_frames(self, frames: int, kind: SegmentKind = "hold") -> int:
        return self._add(self._last, max(1, frames), kind)

    def _add(
        self, to: Waypoint, frames: int, kind: SegmentKind, hop: float = 0.0, over: float = 0.0
    ) -> int:
        seg = Segment(self._frame, self._frame + frames, self._last, to, kind, hop, over)
        self._segments.append(seg)
        self._starts.append(seg.start_frame)
        self._last = to
        self._frame += frames
        return self._frame

    def sample(self, frame: int) -> Waypoint:
        """The waypoint at a frame (after the last segment: its end, holding still)."""
        if not self._segments or frame >= self._frame:
            return self._with_tremor(self._last, frame, 1.0)
        i = max(0, bisect.bisect_right(self._starts, frame) - 1)
        seg = self._segments[i]
        u = (frame - seg.start_frame) / max(1, seg.end_frame - seg.start_frame)
        if seg.kind == "move":
            return self._with_tremor(_reach(seg, u), frame, 0.5)
        point = seg.end
        if seg.kind == "run":  # reaction torque: a small twist and buzz while the tool runs
            buzz = 0.35 * math.sin(frame * 2.1)
            point = Waypoint(
                (point.tip_px[0] + buzz, point.tip_px[1] - 0.5 * buzz),
                point.lift_px,
                point.bias_rad + 0.03 * math.sin(math.pi * u),
            )
        return self._with_tremor(point, frame, 1.0)

    def _with_tremor(self, w: Waypoint, frame: int, gain: float) -> Waypoint:
        t = frame / self.fps
        dx = sum(
            math.sin(2 * math.pi * f * t + p)
            for f, p in zip(self._tremor_hz, self._tremor[0], strict=True)
        )
        dy = sum(
            math.sin(2 * math.pi * f * t + p)
            for f, p in zip(self._tremor_hz, self._tremor[1], strict=True)
        )
        k = TREMOR_PX * gain / 3.0
        return Waypoint((w.tip_px[0] + k * dx, w.tip_px[1] + k * dy), w.lift_px, w.bias_rad)


def _reach(seg: Segment, u: float) -> Waypoint:
    s = minimum_jerk(u)
    (ax, ay), (bx, by) = seg.start.tip_px, seg.end.tip_px
    x, y = ax + (bx - ax) * s, ay + (by - ay) * s
    if seg.overshoot_px > 0:
        dist = math.hypot(bx - ax, by - ay)
        v = (u - 0.65) / 0.35
        if dist > 1e-6 and 0.0 < v < 1.0:
            bump = math.sin(math.pi * v) ** 2 * seg.overshoot_px
            x += (bx - ax) / dist * bump
            y += (by - ay) / dist * bump
    lift = seg.start.lift_px + (seg.end.lift_px - seg.start.lift_px) * s
    lift += seg.hop_px * math.sin(math.pi * min(1.0, max(0.0, u))) ** 2
    bias = seg.start.bias_rad + (seg.end.bias_rad - seg.start.bias_rad) * s
    return Waypoint((x, y), lift, bias)
