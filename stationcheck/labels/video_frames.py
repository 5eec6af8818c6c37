"""Frames of a recorded video by index, for labelling: one at a time (the screen) or a span
in order (propagation, saving).

Reading forward is exact; a jump backwards (or far ahead) reopens the file at the wanted
frame by decoding from the start, since seeking in a compressed file can land a frame off,
and a label one frame off is a wrong label.
"""

from __future__ import annotations

import logging
import math
import threading
from collections.abc import Iterator
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.errors import InputFileError

log = logging.getLogger(__name__)

Image = npt.NDArray[np.uint8]
MAX_SKIP_FRAMES = 600  # further ahead than this, decoding from the start is no slower


class VideoFrames:
    """A video file read by frame index; safe to share between threads (one lock)."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self._lock = threading.Lock()
        self._capture = self._open()
        fps = float(self._capture.get(cv2.CAP_PROP_FPS) or 0.0)
        if not fps > 0 or not math.isfinite(fps):
            self._capture.release()
            raise InputFileError(f"video {path} has no usable frame rate")
        self.fps = fps
        self.frame_count = int(self._capture.get(cv2.CAP_PROP_FRAME_COUNT) or 0)
        self.width_px = int(self._capture.get(cv2.CAP_PROP_FRAME_WIDTH))
        self.height_px = int(self._capture.get(cv2.CAP_PROP_FRAME_HEIGHT))
        self._next = 0  # index of the frame the capture reads next
        self._last: Image | None = None  # frame _next - 1 (spans share their end frames)

    def _open(self) -> cv2.VideoCapture:
        if not self.path.is_file():
            raise InputFileError(f"no such video file: {self.path}")
        capture = cv2.VideoCapture(str(self.path), cv2.CAP_FFMPEG)
        if not capture.isOpened():
            capture.release()
            raise InputFileError(f"cannot read video {self.path}: not a video OpenCV can open")
        return capture

    def _seek(self, index: int) -> None:
        self._last = None
        if index < self._next or index - self._next > MAX_SKIP_FRAMES and index > MAX_SKIP_FRAMES:
            self._capture.release()
            self._capture = self._open()
            self._next = 0
        while self._next < index:
            if not self._capture.grab():
                raise InputFileError(f"video {self.path} ends before frame {index}")
            self._next += 1

    def _read(self) -> Image:
        ok, image = self._capture.read()
        if not ok or image is None:
            raise InputFileError(f"video {self.path} has no frame {self._next}")
        self._next += 1
        if image.ndim == 2:
            image = cv2.cvtColor(image, cv2.COLOR_GRAY2BGR)
        self._last = np.ascontiguousarray(image)
        return self._last

    def _at(self, index: int) -> Image:
        if index == self._next - 1 and self._last is not None:
            return self._last
        self._seek(index)
        return self._read()

    def frame(self, index: int) -> Image:
        """Frame ``index`` (BGR). Raises InputFileError when the file has no such frame."""
        if index < 0 or (self.frame_count and index >= self.frame_count):
            raise InputFileError(f"video {self.path.name} has frames 0 to {self.frame_count - 1}")
        with self._lock:
            return self._at(index).copy()

    def span(self, first: int, last: int) -> Iterator[tuple[int, Image]]:
        """Frames ``first`` to ``last`` (inclusive) in order; holds the lock while iterating."""
        with self._lock:
            yield first, self._at(first)
            for index in range(first + 1, last + 1):
                yield index, self._read()

    def close(self) -> None:
        with self._lock:
            self._capture.release()
