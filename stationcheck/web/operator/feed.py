"""The operator screen's feed: the frame loop hands over its newest frame, the screen's own
thread draws and encodes it, viewers take the newest picture they have not seen.

The loop never waits for the screen. :meth:`OperatorFeed.on_frame` builds the frame's view
(a few microseconds), puts it in a one-place slot (replacing what was not drawn yet) and
returns; drawing the zones, JPEG encoding and sending happen on other threads. The drawing
thread renders at most ``max_fps`` times a second and draws pictures only while someone
watches them; a slow or stalled viewer only misses pictures, it never holds up the others.

The feed is a frame sink and a step sink of the loop (see :mod:`stationcheck.pipeline.frame_loop`
and :mod:`stationcheck.pipeline.decision_core`). With a :class:`DecisionCore` given (live runs),
acknowledge presses from the screen are applied on the loop's thread at its next frame.
"""

from __future__ import annotations

import json
import logging
import threading
import time
from collections import deque
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, Literal

import cv2

from stationcheck.core.observations import PictureState
from stationcheck.core.plan import StationPlan
from stationcheck.errors import first_line, stop_requested
from stationcheck.overlay.scene import draw_scene
from stationcheck.overlay.station_view import StationView, StationViewBuilder
from stationcheck.overlay.symbols import Image
from stationcheck.pipeline.decision_core import DecisionCore, DecisionStep
from stationcheck.pipeline.frame_path import FrameResult
from stationcheck.web.operator.acknowledge import AckInbox
from stationcheck.web.operator.screen_state import (
    RecentAlarms,
    picture_state,
    steady_state,
    tick_state,
)
from stationcheck.web.operator.wording import Wording

logger = logging.getLogger(__name__)

ScreenMode = Literal["live", "replay"]
DEFAULT_MAX_FPS = 15.0
DEFAULT_JPEG_QUALITY = 80


@dataclass(frozen=True)
class _Handed:
    image: Image
    view: StationView
    recent_alarms: tuple[str, ...]
    handed_at_s: float


@dataclass(frozen=True)
class ScreenFrame:
    """One rendered moment: the page's text (``steady`` + ``tick``) and, while someone watches
    pictures, the camera image with the zones drawn as JPEG."""

    seq: int
    frame_index: int
    steady: dict[str, Any]
    steady_json: str
    tick: dict[str, Any]
    jpeg: bytes | None
    handed_at_s: float
    ready_at_s: float


class OperatorFeed:
    def __init__(
        self,
        plan: StationPlan,
        *,
        mode: ScreenMode = "live",
        decisions: DecisionCore | None = None,
        max_fps: float = DEFAULT_MAX_FPS,
        jpeg_quality: int = DEFAULT_JPEG_QUALITY,
        clock: Callable[[], float] = time.perf_counter,
    ) -> None:
        if max_fps <= 0:
            raise ValueError(f"OperatorFeed.max_fps must be > 0, got {max_fps}")
        if not 1 <= jpeg_quality <= 100:
            raise ValueError(f"OperatorFeed.jpeg_quality must be 1..100, got {jpeg_quality}")
        self.plan = plan
        self.mode = mode
        self.decisions = decisions
        self.min_gap_s = 1.0 / max_fps
        self.jpeg_quality = jpeg_quality
        self.clock = clock
        self.wording = Wording(plan)
        self.views = StationViewBuilder(plan)
        self.recent = RecentAlarms()
        self.acks = AckInbox()
        self.frames_handed = 0
        self.frames_rendered = 0
        self.sent_ms: deque[float] = deque(maxlen=20_000)  # handed -> picture written to a viewer
        self.last_sent_seq = 0
        self.ended: str | None = None
        self.picture: PictureState | None = None  # the latest picture-quality figures
        self._lock = threading.Lock()
        self._slot: _Handed | None = None
        self._last: _Handed | None = None
        self._again = False
        self._image_viewers = 0
        self._wake = threading.Event()
        self._closed = threading.Event()
        self._published = threading.Condition()
        self._latest: ScreenFrame | None = None
        self._seq = 0
        self._warned = False
        self._thread = threading.Thread(target=self._run, name="operator-screen", daemon=True)
        self._thread.start()

    # --- the frame loop's side: never blocks ---
    def on_step(self, step: DecisionStep) -> None:
        self.views.fold(step.events)
        self.recent.fold(step.events)
        if isinstance(step.observation, PictureState):
            self.picture = step.observation

    def on_frame(self, result: FrameResult) -> None:
        output = result.output
        if self.decisions is not None and self.acks.apply_pending(
            self.decisions, result.sighting.frame.t_s
        ):
            output = self.decisions.last_output or output
        try:
            pose = result.sighting.pose
            view = self.views.view(
                output,
                frame_index=result.sighting.frame.index,
                t_s=result.sighting.frame.t_s,
                tip_px=pose.tip_px,
                rear_px=pose.rear_px,
                tip_seen=pose.seen,
            )
            handed = _Handed(
                result.sighting.frame.image, view, tuple(self.recent.active(view.t_s)), self.clock()
            )
        except Exception:  # the screen must never stop the station
            if not self._warned:
                logger.exception("operator screen: cannot build the view of a frame")
                self._warned = True
            return
        with self._lock:
            self._slot = handed
            self.frames_handed += 1
        self._wake.set()

    def on_stop(self, error: BaseException | None) -> None:
        """The run ended: the screen says so and shows the tool off."""
        if error is None:
            self.ended = "ended"
        elif stop_requested(error):
            self.ended = "stopped"  # nothing went wrong
        else:
            self.ended = f"stopped: {first_line(error)}"
        with self._lock:
            if self._slot is None and self._last is not None:
                self._slot = self._last
        self._wake.set()

    # --- the viewers' side ---
    @property
    def closed(self) -> bool:
        return self._closed.is_set()

    @property
    def latest(self) -> ScreenFrame | None:
        return self._latest

    def wait_newer(self, seq: int, timeout_s: float) -> ScreenFrame | None:
        """The newest frame after ``seq``, waiting up to ``timeout_s``; None if none came or
        the feed closed."""
        with self._published:
            self._published.wait_for(
                lambda: self.closed or (self._latest is not None and self._latest.seq > seq),
                timeout_s,
            )
            latest = self._latest
        if self.closed or latest is None or latest.seq <= seq:
            return None
        return latest

    @contextmanager
    def watching_pictures(self) -> Iterator[None]:
        """While inside, the drawing thread also draws and encodes pictures."""
        with self._lock:
            self._image_viewers += 1
            latest = self._latest
            if (latest is None or latest.jpeg is None) and self._last is not None:
                self._again = True
        self._wake.set()
        try:
            yield
        finally:
            with self._lock:
                self._image_viewers -= 1

    def note_sent(self, frame: ScreenFrame) -> None:
        """A viewer's stream has written ``frame``'s picture to its socket."""
        self.sent_ms.append((self.clock() - frame.handed_at_s) * 1e3)
        self.last_sent_seq = max(self.last_sent_seq, frame.seq)

    def close(self, ended_draw_s: float = 2.0) -> None:
        """Ends every viewer's stream and the drawing thread; a run that ended is drawn as
        ended first (up to ``ended_draw_s``), so the streams' last word is how it ended."""
        if self.ended is not None and (self._slot is not None or self._last is not None):
            with self._published:
                self._published.wait_for(
                    lambda: self._latest is not None and "ended" in self._latest.steady,
                    ended_draw_s,
                )
        self._closed.set()
        self._wake.set()
        with self._published:
            self._published.notify_all()
        self._thread.join(timeout=5)

    # --- the drawing thread ---
    def _run(self) -> None:
        next_at = 0.0
        while not self.closed:
            self._wake.wait(timeout=1.0)
            self._wake.clear()
            wait_s = next_at - self.clock()
            if wait_s > 0 and self._closed.wait(wait_s):
                return
            with self._lock:
                handed = self._slot
                if handed is None and self._again:
                    handed = self._last
                self._slot, self._again = None, False
                if handed is not None:
                    self._last = handed  # under the lock: on_stop may hand it again
                pictures = self._image_viewers > 0
            if handed is None or self.closed:
                continue
            try:
                frame = self._render(handed, pictures)
            except Exception:
                logger.exception("operator screen: drawing a frame failed")
                continue
            next_at = frame.ready_at_s + self.min_gap_s
            with self._published:
                self._latest = frame
                self._published.notify_all()

    def _render(self, handed: _Handed, pictures: bool) -> ScreenFrame:
        view = handed.view
        steady = steady_state(
            view,
            self.wording,
            mode=self.mode,
            recent=list(handed.recent_alarms),
            acks_allowed=self.decisions is not None,
            ended=self.ended,
        )
        steady["picture"] = picture_state(self.picture)
        jpeg = self._picture(handed) if pictures else None
        self._seq += 1
        ready = self.clock()
        self.frames_rendered += 1
        return ScreenFrame(
            self._seq,
            view.frame_index,
            steady,
            json.dumps(steady, separators=(",", ":")),
            tick_state(view, self._seq),
            jpeg,
            handed.handed_at_s,
            ready,
        )

    def _picture(self, handed: _Handed) -> bytes:
        image = handed.image.copy()
        draw_scene(image, self.plan, handed.view, self.wording.position_names)
        ok, encoded = cv2.imencode(".jpg", image, [cv2.IMWRITE_JPEG_QUALITY, self.jpeg_quality])
        if not ok:
            raise ValueError("JPEG encoding failed")
        return bytes(encoded.tobytes())

    def snapshot_jpeg(self) -> bytes | None:
        """The newest picture, drawn now on the caller's thread if none was drawn yet."""
        latest, last = self._latest, self._last
        if latest is not None and latest.jpeg is not None:
            return latest.jpeg
        return self._picture(last) if last is not None else None
