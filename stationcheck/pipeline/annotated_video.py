"""The annotated video: every frame with its decisions drawn, written as MPEG-4 Part 2
(``mp4v``; the OpenCV wheels have no H.264 encoder). Only written when asked for: the station
stores no video by default.

Drawing and encoding each run in a thread of their own (OpenCV releases the interpreter lock),
so on a machine with a second core the video costs the frame loop little; bounded queues make
the loop wait rather than pile up frames. A failure in either thread is reported on the loop's
thread at the next frame (or by :meth:`AnnotatedVideoWriter.raise_if_failed`).
"""

from __future__ import annotations

import logging
import queue
import threading
from collections.abc import Callable
from pathlib import Path
from typing import Generic, TypeVar

import cv2

from stationcheck.core.plan import StationPlan
from stationcheck.errors import InputFileError
from stationcheck.overlay.annotator import Annotator
from stationcheck.overlay.station_view import StationView, StationViewBuilder
from stationcheck.overlay.symbols import Image
from stationcheck.pipeline.decision_core import DecisionStep
from stationcheck.pipeline.frame_path import FrameResult

logger = logging.getLogger(__name__)

FOURCC = "mp4v"
QUEUE_FRAMES = 8
T = TypeVar("T")


class _Stage(Generic[T]):
    """A thread that applies ``work`` to each queued item until it gets None."""

    def __init__(self, name: str, work: Callable[[T], None]) -> None:
        self.work = work
        self.queue: queue.Queue[T | None] = queue.Queue(maxsize=QUEUE_FRAMES)
        self.error: BaseException | None = None
        self.thread = threading.Thread(target=self._run, name=name, daemon=True)
        self.thread.start()

    def _run(self) -> None:
        while True:
            item = self.queue.get()
            if item is None:
                return
            if self.error is not None:
                continue  # keep draining so nobody blocks on a dead stage
            try:
                self.work(item)
            except Exception as exc:  # noqa: BLE001 - reported on the loop's thread
                self.error = exc

    def finish(self) -> None:
        if self.thread.is_alive():
            self.queue.put(None)
            self.thread.join()


class AnnotatedVideoWriter:
    """A step sink (to follow every event) and a frame sink (to draw and write each frame)."""

    def __init__(
        self,
        path: Path | str,
        plan: StationPlan,
        fps: float,
        title: str = "stationcheck replay",
        every: int = 1,
    ) -> None:
        """``every``: draw every n-th frame only (the video then plays at ``fps / every``)."""
        self.path = Path(path)
        if every < 1:
            raise ValueError(f"AnnotatedVideoWriter.every must be >= 1, got {every}")
        self.every = every
        if self.path.suffix.lower() != ".mp4":
            raise InputFileError(f"the annotated video must be an .mp4 file, got {self.path}")
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputFileError(f"cannot create the folder of {self.path}: {exc}") from exc
        self.fps = fps / every
        self.annotator = Annotator(plan, title)
        self.views = StationViewBuilder(plan)
        self.frames_written = 0
        self._writer: cv2.VideoWriter | None = None
        self._encode: _Stage[Image] = _Stage("annotated-video-encode", self._write)
        self._draw: _Stage[tuple[Image, StationView]] = _Stage("annotated-video-draw", self._paint)

    def on_step(self, step: DecisionStep) -> None:
        self.views.fold(step.events)

    def on_frame(self, result: FrameResult) -> None:
        self.raise_if_failed()
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
        self._draw.queue.put((result.sighting.frame.image, view))

    def on_stop(self, error: BaseException | None) -> None:
        """Writes what is queued and closes the file (the frames up to a failure stay)."""
        self._draw.finish()
        self._encode.finish()
        if self._writer is not None:
            self._writer.release()
            self._writer = None
            logger.info("annotated video: %d frames in %s", self.frames_written, self.path)

    def raise_if_failed(self) -> None:
        error = self._draw.error or self._encode.error
        if error is not None:
            raise InputFileError(f"cannot write the annotated video {self.path}: {error}")

    def _paint(self, item: tuple[Image, StationView]) -> None:
        image, view = item
        self._encode.queue.put(self.annotator.annotate(image, view))

    def _write(self, canvas: Image) -> None:
        if self._writer is None:
            self._writer = cv2.VideoWriter(
                str(self.path),
                cv2.VideoWriter.fourcc(*FOURCC),
                self.fps,
                (canvas.shape[1], canvas.shape[0]),
            )
            if not self._writer.isOpened():
                raise InputFileError(f"cannot open a video writer for {self.path}")
        self._writer.write(canvas)
        self.frames_written += 1
