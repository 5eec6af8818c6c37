"""The frame grabber: reads a source on its own thread and keeps only the newest frame.

The frame loop takes the newest frame it has not seen; frames that were replaced before the
loop took them count as dropped, so a slow loop loses frames instead of falling behind. A video
file can be paced at its own frame rate (a dry run that looks like a camera). A source that
fails is closed and opened again with a growing back-off; meanwhile the loop gets no frame and
its stale-frame watchdog keeps the tool inhibited. A file that ends ends the run.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass

from stationcheck.core.records import Frame
from stationcheck.errors import first_line
from stationcheck.pipeline.frame_loop import GrabbedFrame
from stationcheck.sources.frame_source import FrameSource

logger = logging.getLogger(__name__)

SourceOpener = Callable[[], FrameSource]


@dataclass
class GrabberCounts:
    grabbed: int = 0
    taken: int = 0
    dropped: int = 0  # replaced by a newer frame before the loop took it
    opens: int = 0
    failures: int = 0


class FrameGrabber:
    def __init__(
        self,
        opener: SourceOpener,
        *,
        pace: bool = False,
        speed: float = 1.0,
        retry: bool = True,
        backoff_first_s: float = 0.2,
        backoff_max_s: float = 5.0,
    ) -> None:
        self.opener = opener
        self.pace = pace
        if speed <= 0:
            raise ValueError(f"speed must be > 0, got {speed}")
        self.speed = speed  # a paced file plays this many times faster than recorded
        self.retry = retry
        self.backoff_first_s = backoff_first_s
        self.backoff_max_s = backoff_max_s
        self.counts = GrabberCounts()
        self.fps: float | None = None
        self.last_error = ""
        self._newest: GrabbedFrame | None = None
        self._condition = threading.Condition()
        self._stop = threading.Event()
        self._ended = False
        self._thread: threading.Thread | None = None

    @property
    def ended(self) -> bool:
        """The source ended for good (a file ran out, or a failure with ``retry`` off) and
        every frame it gave has been taken."""
        with self._condition:
            return self._ended and self._newest is None

    def start(self) -> FrameGrabber:
        self._thread = threading.Thread(target=self._run, name="frame-grabber", daemon=True)
        self._thread.start()
        return self

    def stop(self, timeout_s: float = 2.0) -> None:
        self._stop.set()
        with self._condition:
            self._condition.notify_all()
        if self._thread is not None:
            self._thread.join(timeout_s)

    def take(self, timeout_s: float) -> GrabbedFrame | None:
        """The newest frame not taken yet, waiting at most ``timeout_s`` for one."""
        deadline = time.monotonic() + timeout_s
        with self._condition:
            while self._newest is None and not self._ended and not self._stop.is_set():
                left = deadline - time.monotonic()
                if left <= 0:
                    return None
                self._condition.wait(left)
            grabbed, self._newest = self._newest, None
            if grabbed is not None:
                self.counts.taken += 1
            return grabbed

    def _put(self, frame: Frame) -> None:
        with self._condition:
            if self._newest is not None:
                self.counts.dropped += 1
            self._newest = GrabbedFrame(frame, time.perf_counter())
            self.counts.grabbed += 1
            self._condition.notify_all()

    def _run(self) -> None:
        backoff_s = self.backoff_first_s
        try:
            while not self._stop.is_set():
                try:
                    source = self.opener()
                except Exception as exc:  # noqa: BLE001 - any failure to open is retried
                    if not self._failed(exc):
                        return
                    self._stop.wait(backoff_s)
                    backoff_s = min(backoff_s * 2, self.backoff_max_s)
                    continue
                self.counts.opens += 1
                self.fps = source.fps
                before = self.counts.grabbed
                try:
                    self._read(source)
                    if not self._stop.is_set():
                        logger.info("frame source %s ended", source.name)
                        return  # a file ran out: the run ends
                except Exception as exc:  # noqa: BLE001
                    if not self._failed(exc):
                        return
                    if self.counts.grabbed > before:
                        backoff_s = self.backoff_first_s
                    self._stop.wait(backoff_s)
                    backoff_s = min(backoff_s * 2, self.backoff_max_s)
                finally:
                    source.close()
        finally:
            with self._condition:
                self._ended = True
                self._condition.notify_all()

    def _read(self, source: FrameSource) -> None:
        started = time.perf_counter()
        first_t_s: float | None = None
        for frame in source:
            if self._stop.is_set():
                break
            if self.pace:
                first_t_s = frame.t_s if first_t_s is None else first_t_s
                due = started + (frame.t_s - first_t_s) / self.speed
                if self._stop.wait(max(0.0, due - time.perf_counter())):
                    break
            self._put(frame)

    def _failed(self, exc: Exception) -> bool:
        """Notes a failure; True when the grabber retries."""
        self.counts.failures += 1
        message = first_line(exc)
        if message != self.last_error:
            logger.warning("frame source: %s%s", message, "; retrying" if self.retry else "")
        self.last_error = message
        return self.retry
