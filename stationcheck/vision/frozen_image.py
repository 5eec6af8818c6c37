"""Frozen picture: a camera or capture card that keeps delivering the same image.

Frames that keep arriving look fresh to the stale-frame watchdog, so the picture itself is
watched. Each frame is shrunk to a small grey image (area averaging, which also averages sensor
noise down); its mean absolute difference from the last frame that changed is compared with the
camera's own noise, learned over the first frames of the run. A real camera never repeats a
frame exactly: even a still, empty station differs from frame to frame by its sensor noise. A
frozen source repeats the same picture (difference near 0). Where the source gives its own
frame timestamps, a timestamp that does not advance is a repeated frame whatever the picture.

:meth:`FrozenImageWatch.see` returns how long the picture has not changed (``frozen_ms``); the
sequencer inhibits once that reaches the stale-frame time (``image_frozen`` alarm).

The check by content is armed once ``learn_frames`` frames have changed by more than
``min_change``: a source without any noise (a synthetic picture) never arms it, and neither does
a source frozen from its very first frame (source timestamps still catch that one).
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class FrozenImageSettings:
    width_px: int = 80  # a 640x480 frame averages 8x8 pixels per cell: noise sigma / 8
    height_px: int = 60
    learn_frames: int = 30  # the noise floor: the 10th percentile of the changes over these
    floor_fraction: float = 0.1  # less change than this share of the noise floor is none
    min_change: float = 0.02  # grey levels; at most this is no change, whatever the floor

    def __post_init__(self) -> None:
        if self.width_px < 4 or self.height_px < 4 or self.learn_frames < 2:
            raise ValueError(f"FrozenImageSettings too small: {self}")
        if not 0.0 < self.floor_fraction < 1.0 or self.min_change < 0.0:
            raise ValueError(f"FrozenImageSettings fraction/min_change out of range: {self}")


class FrozenImageWatch:
    """Per run: call :meth:`see` once per frame, in order."""

    def __init__(self, settings: FrozenImageSettings | None = None) -> None:
        self.settings = settings or FrozenImageSettings()
        self._last: npt.NDArray[np.float32] | None = None
        self._changed_t_s = 0.0
        self._source_t_s: float | None = None
        self._learning: list[float] = []
        self.noise_floor: float | None = None  # mean grey-level change of a live camera
        self.last_change = 0.0

    @property
    def threshold(self) -> float:
        floor = self.noise_floor if self.noise_floor is not None else 0.0
        return max(self.settings.min_change, self.settings.floor_fraction * floor)

    def see(self, frame: Frame, source_t_s: float | None = None) -> float:
        """How long (ms) the picture has shown no change beyond the noise, as of this frame."""
        small = self._shrink(frame.image)
        if self._last is None:
            self._last, self._changed_t_s, self._source_t_s = small, frame.t_s, source_t_s
            return 0.0
        repeated_stamp = source_t_s is not None and source_t_s == self._source_t_s
        change = float(np.mean(np.abs(small - self._last)))
        self.last_change = change
        if self.noise_floor is None:
            self._learn(change)
            if not repeated_stamp:  # by content only once the camera's noise is known
                self._last, self._changed_t_s, self._source_t_s = small, frame.t_s, source_t_s
                return 0.0
        if change > self.threshold and not repeated_stamp:
            self._last, self._changed_t_s, self._source_t_s = small, frame.t_s, source_t_s
            return 0.0
        return max(0.0, (frame.t_s - self._changed_t_s) * 1000.0)

    def _learn(self, change: float) -> None:
        if change > self.settings.min_change:
            self._learning.append(change)
        if len(self._learning) >= self.settings.learn_frames:
            self.noise_floor = float(np.percentile(self._learning, 10))
            logger.info(
                "camera noise floor %.3f grey levels per cell; no change below %.3f",
                self.noise_floor,
                self.threshold,
            )

    def _shrink(self, image: npt.NDArray[np.uint8]) -> npt.NDArray[np.float32]:
        grey = cv2.cvtColor(image, cv2.COLOR_BGR2GRAY)
        size = (self.settings.width_px, self.settings.height_px)
        small = cv2.resize(grey, size, interpolation=cv2.INTER_AREA)
        return np.asarray(small, dtype=np.float32)
