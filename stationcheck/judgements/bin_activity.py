"""Is something reaching into a part bin? Change against a learned empty bin and its noise floor.

The bin zone's box is cut into cells of ``CELL_PX`` square, and each frame is reduced to the
cells' mean grey levels: averaging 64 pixels divides sensor noise by 8 and leaves a JPEG
block's mean nearly untouched, while a hand or forearm still changes whole cells. Per cell the
judge keeps

* the empty bin's level (the background), started from the reference frame and kept up to date
  from calm frames, so slow light drift, a fixed vignette or colour cast and the bin's contents
  changing are absorbed;
* its noise floor: the running variance of the cell about the background in calm frames, so a
  noisy, compressed or textured cell needs a larger change than a clean, flat one.

Frames are first divided by the zone's own gain against the background (the median ratio over
its cells), which absorbs a light step over the whole zone. A cell counts as changed when it
differs from the background by more than ``K_SIGMA`` times its noise floor and at least
``MIN_LEVELS``. The bin has evidence of a reach when the changed share of the zone reaches
``changed_fraction``, and counts as active when the evidence lasts ``settle_ms``; inactive again
when it stays below 60 % of that for ``release_ms``.

Three further rules keep noise from ever satisfying a pick:

* when the tool's tip is seen, evidence counts only with the tip within ``tool_reach_px`` of the
  bin (the operator reaches in with the hand that holds the tool), and an active bin turns
  calm once the tip is seen away from it (an arm or shadow left over the bin is no reach); set
  it to 0 on stations where the free hand picks;
* a change that stays still joins the background, so it does not keep the bin active: after
  ``AWAY_STILL_S`` while the tip is seen away from the bin (a part was taken out), else after
  ``STILL_S`` (something left lying in the bin; a hand held still stays active meanwhile);
* when the first live picture differs from the reference frame as a whole (other light, lens,
  compression), the judge spends ``LEARN_S`` adapting to it (only cells still like the
  reference are adopted) and meanwhile says it cannot judge;
* when the zone's typical noise floor exceeds ``MAX_FLOOR_LEVELS`` (a hand could hide in the
  noise), the reading says the bin cannot be judged; the station then reports "cannot judge"
  and never confirms a pick from it.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.config.judgement_settings import BinActivitySettings
from stationcheck.core.observations import BinActivity
from stationcheck.judgements.zone_window import U8Array, zone_box_px, zone_window

logger = logging.getLogger(__name__)

F32Array = npt.NDArray[np.float32]
CELL_PX = 8
K_SIGMA = 5.0
MIN_LEVELS = 10.0  # grey levels (reference brightness): the smallest change that counts
START_SIGMA = 2.0  # noise floor assumed before any live frame was seen
LEARN_S = 1.0  # a first picture unlike the reference: adapt for a second, report nothing
LIKE_SPREAD = 2.0 * START_SIGMA  # first picture's spread about the reference up to this: alike
LEARN_RATE = 0.25
CALM_S = 4.0  # time constant of the background and the noise floor in calm frames
STILL_S = 30.0  # a still change joins the background after this (a part left in the bin)
AWAY_STILL_S = 0.5  # the same while the tool's tip is seen away from the bin (a part taken)
MAX_FLOOR_LEVELS = 24.0  # K_SIGMA x typical cell sigma above this: cannot judge
LIKE_REFERENCE = 0.3  # while learning, a cell within 30 % of the reference is adopted
TOOL_MEMORY_S = 0.5  # a tip seen near the bin this recently still counts as near
UNSEEN_MEMORY_S = 3.0  # a tip last seen away from the bin counts as away this long
RELEASE_RATIO = 0.6
GAIN_RANGE = (0.15, 6.0)


@dataclass(frozen=True)
class BinReading:
    """One frame: the changed share of the zone, whether it is evidence of a reach, the zone's
    typical noise floor (levels) and whether the bin can be judged at all."""

    fraction: float
    changed: bool
    floor_levels: float = 0.0
    judgeable: bool = True
    learning: bool = False  # still learning a first picture unlike the reference


class BinActivityJudge:
    """One bin zone. Call :meth:`measure` on every frame, then :meth:`decide`."""

    def __init__(
        self,
        zone_id: str,
        polygon_px: Sequence[tuple[float, float]],
        frame_size_px: tuple[int, int],
        settings: BinActivitySettings,
        empty_bgr: U8Array | None = None,
    ) -> None:
        width, height = frame_size_px
        self.zone_id = zone_id
        self.settings = settings
        self.window = zone_window(zone_id, polygon_px, width, height)
        x0, y0, x1, y1 = zone_box_px(polygon_px)
        self._box_px = (float(x0), float(y0), float(x1), float(y1))
        self._cells = (
            max(1, self.window.width_px // CELL_PX),
            max(1, self.window.height_px // CELL_PX),
        )
        mask = cv2.resize(self.window.mask, self._cells, interpolation=cv2.INTER_AREA)
        self._inside = np.asarray(mask, np.uint8) >= 128
        if not self._inside.any():
            self._inside[:] = True
        self._count = int(self._inside.sum())
        self.active = False
        self._changed_since: float | None = None
        self._calm_since: float | None = None
        self._last_t_s: float | None = None
        self._first_t_s: float | None = None
        self._tool_near_t_s: float | None = None
        self._tool_seen_t_s: float | None = None
        self._tool_far = False
        self._reference = np.full(self._cells[::-1], 128.0, np.float32)
        self._background = self._reference.copy()
        self._variance = np.full_like(self._reference, START_SIGMA**2)
        self._previous: F32Array | None = None
        self._still_since = np.zeros_like(self._reference)
        self._had_live = False
        self._learn_until_t_s = 0.0
        if empty_bgr is not None:
            self.relearn(empty_bgr)

    def relearn(self, empty_bgr: U8Array) -> None:
        """Start afresh from a whole frame showing the bin empty (the reference frame)."""
        self._reference = self._levels(empty_bgr)
        self._background = self._reference.copy()
        self._variance = np.full_like(self._reference, START_SIGMA**2)
        self._previous = None
        self._first_t_s = None
        self._had_live = False

    def tool_seen(self, t_s: float, tip_px: tuple[float, float] | None) -> None:
        """Where the tool's tip is seen now (None: not seen). Call before :meth:`measure`."""
        reach = self.settings.tool_reach_px
        if tip_px is None or reach <= 0:
            return
        x0, y0, x1, y1 = self._box_px
        dx = max(x0 - tip_px[0], 0.0, tip_px[0] - x1)
        dy = max(y0 - tip_px[1], 0.0, tip_px[1] - y1)
        self._tool_far = (dx * dx + dy * dy) > reach * reach
        if not self._tool_far:
            self._tool_near_t_s = t_s
        self._tool_seen_t_s = t_s

    def _tool_away(self, t_s: float) -> bool:
        """The tip is seen away from the bin now, or was last seen away from it less than
        ``UNSEEN_MEMORY_S`` ago (a hand does not reach into a bin unseen that fast), and was
        not near it just before."""
        seen = self._tool_seen_t_s
        if self.settings.tool_reach_px <= 0 or seen is None or not self._tool_far:
            return False
        if seen != t_s and t_s - seen > UNSEEN_MEMORY_S + 1e-9:
            return False  # not seen for long: the picture alone decides
        near = self._tool_near_t_s
        return near is None or t_s - near > TOOL_MEMORY_S + 1e-9

    def _tool_allows(self, t_s: float) -> bool:
        return not self._tool_away(t_s)

    def measure(self, t_s: float, image_bgr: U8Array) -> BinReading:
        """Compares this frame with the empty bin and keeps the model up to date."""
        dt_s = 0.0 if self._last_t_s is None else max(0.0, t_s - self._last_t_s)
        self._last_t_s = t_s
        if self._first_t_s is None:
            self._first_t_s = t_s
        levels = self._levels(image_bgr)
        inside = self._inside
        background = self._background
        usable = inside & (background > 8.0)
        ratio = levels[usable] / background[usable] if usable.any() else np.ones(1, np.float32)
        gain = float(np.clip(np.median(ratio), *GAIN_RANGE))
        levels /= np.float32(gain)
        residual = levels - background
        if not self._had_live:
            self._had_live = True
            spread = float(1.4826 * np.median(np.abs(residual[inside])))
            self._variance = np.full_like(background, max(START_SIGMA, spread) ** 2)
            self._learn_until_t_s = t_s + (LEARN_S if spread > LIKE_SPREAD else 0.0)
        learning = t_s < self._learn_until_t_s - 1e-9
        threshold = np.maximum(
            np.float32(MIN_LEVELS), np.float32(K_SIGMA) * np.sqrt(self._variance)
        )
        changed = (np.abs(residual) > threshold) & inside
        fraction = float(changed.sum()) / self._count
        floor = float(K_SIGMA * np.sqrt(np.median(self._variance[inside])))
        self._update(t_s, dt_s, levels, residual, changed, threshold, learning)
        if learning:
            return BinReading(fraction, False, floor, judgeable=False, learning=True)
        limit = self.settings.changed_fraction * (RELEASE_RATIO if self.active else 1.0)
        judgeable = floor <= MAX_FLOOR_LEVELS
        return BinReading(fraction, judgeable and fraction >= limit, floor, judgeable)

    def _update(
        self,
        t_s: float,
        dt_s: float,
        levels: F32Array,
        residual: F32Array,
        changed: npt.NDArray[np.bool_],
        threshold: F32Array,
        learning: bool,
    ) -> None:
        if learning:
            like = np.abs(levels - self._reference) <= LIKE_REFERENCE * np.maximum(
                self._reference, 16.0
            )
            rate = np.float32(LEARN_RATE)
            self._background += rate * np.where(like, residual, 0.0).astype(np.float32)
            self._variance += rate * np.where(like, residual**2 - self._variance, 0.0).astype(
                np.float32
            )
        else:
            rate = np.float32(min(0.5, dt_s / CALM_S))
            calm = ~changed
            if not self.active:
                self._background += rate * np.where(calm, residual, 0.0).astype(np.float32)
                self._variance += rate * np.where(calm, residual**2 - self._variance, 0.0).astype(
                    np.float32
                )
        previous, self._previous = self._previous, levels
        if previous is None:
            return
        still = np.abs(levels - previous) <= threshold
        self._still_since = np.where(
            still & changed,
            np.where(self._still_since > 0, self._still_since, np.float32(t_s + 1e-3)),
            0.0,
        ).astype(np.float32)
        still_s = AWAY_STILL_S if self._tool_away(t_s) else STILL_S
        settled = (self._still_since > 0) & (t_s + 1e-3 - self._still_since >= still_s)
        if settled.any():
            self._background[settled] = levels[settled]
            self._still_since[settled] = 0.0

    def onset_due(self, t_s: float, reading: BinReading) -> bool:
        """True when :meth:`decide` would switch the bin to active at ``t_s``."""
        if self.active or not reading.changed or not self._tool_allows(t_s):
            return False
        since = t_s if self._changed_since is None else self._changed_since
        return t_s - since >= self.settings.settle_ms / 1000.0 - 1e-9

    def decide(
        self, t_s: float, reading: BinReading, suppressed: bool = False
    ) -> BinActivity | None:
        """The observation when the bin's state changes at ``t_s``, else None. ``suppressed``
        (e.g. the camera may have moved, the picture cannot be judged) forces it inactive."""
        settings = self.settings
        if suppressed or not reading.judgeable:
            self._changed_since = None
            self._calm_since = None
            return self._switch(t_s, False) if self.active else None
        if not self.active:
            self._calm_since = None
            if not reading.changed or not self._tool_allows(t_s):
                self._changed_since = None
                return None
            if self.onset_due(t_s, reading):
                self._changed_since = None
                return self._switch(t_s, True)
            if self._changed_since is None:
                self._changed_since = t_s
            return None
        if reading.changed and self._tool_allows(t_s):
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

    def _levels(self, image_bgr: U8Array) -> F32Array:
        grey = cv2.cvtColor(np.asarray(self.window.crop(image_bgr), np.uint8), cv2.COLOR_BGR2GRAY)
        cells = cv2.resize(grey.astype(np.float32), self._cells, interpolation=cv2.INTER_AREA)
        return np.asarray(cells, np.float32)
