"""Is something reaching into a part bin? A background model of the empty bin, per bin zone.

Method: the adaptive Gaussian mixture background model of Zivkovic (ICPR 2004; Zivkovic and
van der Heijden, Pattern Recognition Letters 2006), as OpenCV's ``BackgroundSubtractorMOG2``,
run only on the bin zone's box at half resolution after dividing out the scene's overall gain
(:mod:`stationcheck.judgements.illumination`). The model starts from the reference frame (an
empty station) and then keeps learning, so slow changes of light and of the bin's contents are
absorbed. Each pixel keeps its own variance, so texture edges that flicker with camera jitter
and sensor noise are tolerated where they occur and nowhere else.

A still object joins the background once its mixture weight passes 1 - background ratio (0.1):
at the idle learning rate (``HISTORY_S``) after about 3 s; while the bin counts as active the
rate drops by ``ACTIVE_LEARNING_FACTOR``, so a hand held still stays foreground for about 30 s,
and something left lying in the bin stops counting as activity after that.

The bin counts as active when the changed share of the zone reaches ``changed_fraction`` for
``settle_ms``, and inactive when it has been below 60 % of that for ``release_ms``.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.core.observations import BinActivity
from stationcheck.judgements.settings import BinActivitySettings
from stationcheck.judgements.zone_window import U8Array, zone_window

logger = logging.getLogger(__name__)

SCALE = 0.5
HISTORY_S = 30.0
ACTIVE_LEARNING_FACTOR = 0.1
VAR_THRESHOLD = 16.0  # squared Mahalanobis distance: a pixel 4 standard deviations off
PRIME_FRAMES = 20
RELEASE_RATIO = 0.6
MAX_LEARNING_RATE = 0.05


@dataclass(frozen=True)
class BinReading:
    """The changed share of the zone in one frame, and whether it counts as a change."""

    fraction: float
    changed: bool


class BinActivityJudge:
    """One bin zone. Call :meth:`measure` on every frame, then :meth:`decide`."""

    def __init__(self, zone_id: str, polygon_px: Sequence[tuple[float, float]],
                 frame_size_px: tuple[int, int], settings: BinActivitySettings,
                 empty_bgr: U8Array | None = None) -> None:
        width, height = frame_size_px
        self.zone_id = zone_id
        self.settings = settings
        self.window = zone_window(zone_id, polygon_px, width, height)
        size = (max(1, round(self.window.width_px * SCALE)),
                max(1, round(self.window.height_px * SCALE)))
        self._size = size
        small_mask = cv2.resize(self.window.mask, size, interpolation=cv2.INTER_AREA)
        self._inside = np.where(small_mask >= 128, 255, 0).astype(np.uint8)
        self._inside_count = max(1, cv2.countNonZero(self._inside))
        self.active = False
        self._changed_since: float | None = None
        self._calm_since: float | None = None
        self._last_t_s: float | None = None
        self._model = self._new_model()
        if empty_bgr is not None:
            self.relearn(empty_bgr)

    def relearn(self, empty_bgr: U8Array, gain: float = 1.0) -> None:
        """Start the background model afresh from a whole frame showing the bin empty."""
        self._model = self._new_model()
        small = self._small(empty_bgr, gain)
        for k in range(PRIME_FRAMES):
            self._model.apply(small, learningRate=1.0 / (k + 1))

    def measure(self, t_s: float, image_bgr: U8Array, gain: float = 1.0) -> BinReading:
        """Updates the background model with this frame (whole BGR frame)."""
        dt_s = 0.0 if self._last_t_s is None else max(0.0, t_s - self._last_t_s)
        self._last_t_s = t_s
        rate = min(MAX_LEARNING_RATE, dt_s / HISTORY_S) if dt_s > 0 else 1.0 / (30.0 * HISTORY_S)
        if self.active:
            rate *= ACTIVE_LEARNING_FACTOR
        foreground = self._model.apply(self._small(image_bgr, gain), learningRate=rate)
        changed = cv2.countNonZero(cv2.bitwise_and(foreground, self._inside))
        fraction = changed / self._inside_count
        limit = self.settings.changed_fraction * (RELEASE_RATIO if self.active else 1.0)
        return BinReading(fraction, fraction >= limit)

    def onset_due(self, t_s: float, reading: BinReading) -> bool:
        """True when :meth:`decide` would switch the bin to active at ``t_s``."""
        if self.active or not reading.changed:
            return False
        since = t_s if self._changed_since is None else self._changed_since
        return t_s - since >= self.settings.settle_ms / 1000.0 - 1e-9

    def decide(self, t_s: float, reading: BinReading,
               suppressed: bool = False) -> BinActivity | None:
        """The observation when the bin's state changes at ``t_s``, else None. ``suppressed``
        (e.g. the camera may have moved) forces the bin inactive."""
        settings = self.settings
        if suppressed:
            self._changed_since = None
            self._calm_since = None
            return self._switch(t_s, False) if self.active else None
        if not self.active:
            self._calm_since = None
            if not reading.changed:
                self._changed_since = None
                return None
            if self.onset_due(t_s, reading):
                self._changed_since = None
                return self._switch(t_s, True)
            if self._changed_since is None:
                self._changed_since = t_s
            return None
        if reading.changed:
            self._calm_since = None
            return None
        if self._calm_since is None:
            self._calm_since = t_s
        if t_s - self._calm_since >= settings.release_ms / 1000.0 - 1e-9:
            self._calm_since = None
            return self._switch(t_s, False)
        return None

    def _switch(self, t_s: float, active: bool) -> BinActivity:
        self.active = active
        logger.debug("bin %s %s at %.3f s", self.zone_id, "active" if active else "calm", t_s)
        return BinActivity(t_s=t_s, zone=self.zone_id, active=active)

    def _small(self, image_bgr: U8Array, gain: float) -> npt.NDArray[np.uint8]:
        grey = cv2.cvtColor(np.asarray(self.window.crop(image_bgr), np.uint8),
                            cv2.COLOR_BGR2GRAY)
        small = cv2.resize(grey, self._size, interpolation=cv2.INTER_AREA)
        if abs(gain - 1.0) > 1e-3:
            small = cv2.convertScaleAbs(small, alpha=1.0 / gain)
        return np.asarray(small, np.uint8)

    @staticmethod
    def _new_model() -> cv2.BackgroundSubtractorMOG2:
        history = int(30 * HISTORY_S)
        return cv2.createBackgroundSubtractorMOG2(
            history=history, varThreshold=VAR_THRESHOLD, detectShadows=False
        )
