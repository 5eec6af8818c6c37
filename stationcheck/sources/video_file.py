"""Frames from a video file through OpenCV's FFmpeg backend, timed by the file's frame rate.

A file that cannot be opened, gives no frame, or stops decoding before the frame count its
container announces is reported with one line (:class:`~stationcheck.errors.InputFileError`);
frames decoded before a mid-file failure are given out first, so the decisions taken on them
stand. OpenCV's and FFmpeg's own console messages are silenced while a file is opened or read.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Self

import cv2
import numpy as np

from stationcheck.core.records import Frame
from stationcheck.errors import InputFileError

logger = logging.getLogger(__name__)

# Containers sometimes announce one frame more than they hold; a larger gap means damage.
FRAME_COUNT_SLACK = 1


@contextmanager
def _opencv_quiet() -> Iterator[None]:
    """No console messages from OpenCV (and the FFmpeg messages it passes on) while opening
    or decoding: the error raised is the one line a person should see."""
    level = cv2.utils.logging.getLogLevel()
    cv2.utils.logging.setLogLevel(cv2.utils.logging.LOG_LEVEL_SILENT)
    try:
        yield
    finally:
        cv2.utils.logging.setLogLevel(level)


class VideoFileSource:
    """Frames ``first_frame ... first_frame + max_frames - 1`` of a video file.

    ``t_s`` is ``index / fps`` with the file's own frame rate; ``fps_override`` replaces a
    missing or wrong rate in the file.
    """

    def __init__(
        self,
        path: Path | str,
        *,
        first_frame: int = 0,
        max_frames: int | None = None,
        fps_override: float | None = None,
    ) -> None:
        self.path = Path(path)
        self.name = str(self.path)
        if first_frame < 0:
            raise InputFileError(f"first frame must be >= 0, got {first_frame}")
        if max_frames is not None and max_frames < 1:
            raise InputFileError(f"number of frames must be >= 1, got {max_frames}")
        if not self.path.exists():
            raise InputFileError(f"video file not found: {self.path}")
        if not self.path.is_file():
            raise InputFileError(f"video path is not a file: {self.path}")
        with _opencv_quiet():
            self._capture = cv2.VideoCapture(str(self.path), cv2.CAP_FFMPEG)
        if not self._capture.isOpened():
            self._capture.release()
            raise InputFileError(
                f"cannot read video {self.path}: not a video file OpenCV can open, or damaged"
            )
        fps = fps_override if fps_override is not None else self._capture.get(cv2.CAP_PROP_FPS)
        if not fps or fps <= 0 or math.isnan(fps):
            self._capture.release()
            raise InputFileError(f"video {self.path} has no usable frame rate (got {fps!r})")
        self.fps = float(fps)
        announced = int(self._capture.get(cv2.CAP_PROP_FRAME_COUNT))
        self.file_frame_count: int | None = announced if announced > 0 else None
        self.width_px = int(self._capture.get(cv2.CAP_PROP_FRAME_WIDTH))
        self.height_px = int(self._capture.get(cv2.CAP_PROP_FRAME_HEIGHT))
        self.first_frame = first_frame
        self.max_frames = max_frames
        self.frame_count: int | None = self._planned_count()
        self.frames_read = 0

    def _planned_count(self) -> int | None:
        if self.file_frame_count is None:
            return self.max_frames
        available = max(0, self.file_frame_count - self.first_frame)
        return available if self.max_frames is None else min(available, self.max_frames)

    def __iter__(self) -> Iterator[Frame]:
        capture = self._capture
        index = 0
        while index < self.first_frame:
            with _opencv_quiet():
                grabbed = capture.grab()
            if not grabbed:
                raise InputFileError(
                    f"video {self.path} ends at frame {index}, before the first frame asked "
                    f"for ({self.first_frame})"
                )
            index += 1
        while self.max_frames is None or self.frames_read < self.max_frames:
            with _opencv_quiet():
                ok, image = capture.read()
            if not ok or image is None:
                break
            if image.ndim == 2:
                image = cv2.cvtColor(image, cv2.COLOR_GRAY2BGR)
            yield Frame(index=index, t_s=index / self.fps, image=np.ascontiguousarray(image))
            index += 1
            self.frames_read += 1
        self._check_complete(index)

    def _check_complete(self, end_index: int) -> None:
        if self.frames_read == 0:
            raise InputFileError(f"cannot read video {self.path}: no frame could be decoded")
        planned = self.frame_count
        if planned is not None and self.frames_read < planned - FRAME_COUNT_SLACK:
            total = self.file_frame_count
            raise InputFileError(
                f"video {self.path} is damaged: decoding stopped at frame {end_index} of {total}"
            )

    def close(self) -> None:
        self._capture.release()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
