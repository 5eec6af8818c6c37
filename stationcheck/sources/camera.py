"""Frames from a camera index or a stream URL, through OpenCV (FFmpeg backend for URLs).

Each frame is stamped with the time it was read on the run's clock, since a live camera has no
file time; the backend's own timestamp, when it gives one, goes along as ``source_t_s`` (a
timestamp that stops advancing is a frozen source). Opening failures and a source that stops giving frames raise
:class:`~stationcheck.errors.InputFileError`; the grabber retries them.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Iterator

from stationcheck.core.records import Frame
from stationcheck.errors import InputFileError

logger = logging.getLogger(__name__)

DEFAULT_CAMERA_FPS = 30.0


class CaptureSource:
    def __init__(self, source: int | str, clock: Callable[[], float] = time.monotonic) -> None:
        import cv2

        self.name = f"camera {source}" if isinstance(source, int) else str(source)
        self.clock = clock
        backend = cv2.CAP_ANY if isinstance(source, int) else cv2.CAP_FFMPEG
        self._capture = cv2.VideoCapture(source, backend)
        if not self._capture.isOpened():
            self._capture.release()
            raise InputFileError(f"cannot open {self.name}")
        fps = float(self._capture.get(cv2.CAP_PROP_FPS) or 0.0)
        self.fps = fps if 0 < fps < 1000 else DEFAULT_CAMERA_FPS
        self.frame_count: int | None = None

    def __iter__(self) -> Iterator[Frame]:
        import cv2
        import numpy as np

        index = 0
        while True:
            ok, image = self._capture.read()
            if not ok or image is None:
                raise InputFileError(f"{self.name} stopped giving frames")
            if image.ndim == 2:
                image = cv2.cvtColor(image, cv2.COLOR_GRAY2BGR)
            stamp_ms = float(self._capture.get(cv2.CAP_PROP_POS_MSEC) or 0.0)
            yield Frame(
                index=index,
                t_s=self.clock(),
                image=np.ascontiguousarray(image),
                source_t_s=stamp_ms / 1000.0 if stamp_ms > 0 else None,
            )
            index += 1

    def close(self) -> None:
        self._capture.release()
