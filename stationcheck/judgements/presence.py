"""Is the fixture or part in a check zone present or absent? Compared with taught references.

Method: each class (present, absent) is the mean of its taught crops after normalising every
crop to zero mean and unit variance. The live zone is compared with both class means by
normalised cross-correlation (``cv2.matchTemplate`` with ``TM_CCOEFF_NORMED``; J. P. Lewis,
"Fast Normalized Cross-Correlation", Vision Interface 1995) within ``search_px`` of where the
zone was taught, which makes the comparison blind to overall brightness and contrast (light
drift) and to small camera jitter. A frame gives a verdict only when all hold:

* the zone is still: coarse cells of the zone changed little since the previous frame after
  matching overall brightness (a hand or part passing through, a cross-fade); "little" is
  ``CELL_LEVELS`` or ``MOVING_K`` times the zone's own frame-to-frame noise (the median change
  over its cells, followed slowly), whichever is larger, so sensor noise and JPEG flicker are
  not motion;
* the better class correlates at least ``min_match`` and leads the other by ``min_margin``;
* after fitting brightness and contrast, at most ``MAX_COVERED`` of the zone's pixels lie more
  than ``RESIDUAL_LEVELS`` outside the range the better class shows within one pixel of them
  (a hand covering part of the zone; the one-pixel range forgives sub-pixel misalignment at
  sharp edges).

Otherwise the frame is undecided. A verdict is reported once it held for ``confirm_ms``; any
other frame turns the report to undecided at once, and undecided never releases a unit.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Literal

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.config.judgement_settings import PresenceSettings
from stationcheck.core.observations import CheckVerdict, Verdict
from stationcheck.errors import ConfigError
from stationcheck.judgements.zone_window import U8Array, zone_box_px

logger = logging.getLogger(__name__)

Label = Literal["present", "absent"]
LABELS: tuple[Label, Label] = ("present", "absent")
F32Array = npt.NDArray[np.float32]

RESIDUAL_LEVELS = 24.0
MAX_COVERED = 0.06
CELL_PX = 4
CELL_LEVELS = 6.0
MAX_MOVING = 0.05
MOVING_K = 4.0
NOISE_RATE = 0.1
REPEAT_S = 0.5
Reason = Literal["match", "moving", "no_match", "ambiguous", "covered", "untaught", "camera"]


def normalised(patch: npt.NDArray[np.generic]) -> F32Array:
    """Zero mean, unit variance (a flat patch stays all zeros)."""
    values = np.asarray(patch, np.float32)
    centred = values - np.float32(values.mean())
    spread = float(centred.std())
    return centred / np.float32(spread) if spread > 1e-6 else np.zeros_like(centred)


def class_template(crops: Sequence[npt.NDArray[np.generic]]) -> F32Array:
    """The mean of normalised crops, normalised again."""
    if not crops:
        raise ValueError("class_template needs at least one crop")
    return normalised(np.mean([normalised(crop) for crop in crops], axis=0))


@dataclass(frozen=True)
class TaughtClasses:
    """Grey templates of the zone box, one list per class, and where the box was when taught."""

    zone_id: str
    zone_box_px: tuple[int, int, int, int]
    crops: Mapping[Label, tuple[F32Array, ...]]

    def __post_init__(self) -> None:
        shapes = {crop.shape for label in LABELS for crop in self.crops.get(label, ())}
        x0, y0, x1, y1 = self.zone_box_px
        if shapes - {(y1 - y0, x1 - x0)}:
            raise ValueError(f"TaughtClasses: crops must all be {(y1 - y0, x1 - x0)}, got {shapes}")

    @property
    def complete(self) -> bool:
        return all(self.crops.get(label) for label in LABELS)


@dataclass(frozen=True)
class PresenceScore:
    """One frame: NCC with each class, covered share for the better class, frame verdict."""

    verdict: Verdict
    reason: Reason
    present_ncc: float
    absent_ncc: float
    covered_fraction: float
    moving_fraction: float

    @property
    def margin(self) -> float:
        """Positive when the zone looks more like 'present' than 'absent'."""
        return self.present_ncc - self.absent_ncc


UNDECIDED_SCORE = PresenceScore("undecided", "untaught", 0.0, 0.0, 0.0, 0.0)


class PresenceJudge:
    """One check zone against its taught references. :meth:`score` then :meth:`decide`."""

    def __init__(
        self,
        zone_id: str,
        polygon_px: Sequence[tuple[float, float]],
        frame_size_px: tuple[int, int],
        taught: TaughtClasses,
        settings: PresenceSettings,
    ) -> None:
        if not taught.complete:
            raise ConfigError(f"check zone '{zone_id}' needs taught images of both classes")
        self.zone_id = zone_id
        self.settings = settings
        width, height = frame_size_px
        tx0, ty0, tx1, ty1 = taught.zone_box_px
        bx0, by0, bx1, by1 = zone_box_px(polygon_px)
        if (bx1 - bx0, by1 - by0) != (tx1 - tx0, ty1 - ty0):
            raise ConfigError(
                f"check zone '{zone_id}' is {bx1 - bx0}x{by1 - by0} px now but was taught at "
                f"{tx1 - tx0}x{ty1 - ty0} px; teach it again (stationcheck teach CONFIG "
                f"--zone {zone_id} --clear, then --present/--absent)"
            )
        pad = settings.search_px
        self._box = (
            max(0, bx0 - pad),
            max(0, by0 - pad),
            min(width, bx1 + pad),
            min(height, by1 + pad),
        )
        x0, y0, x1, y1 = self._box
        if x1 - x0 < tx1 - tx0 or y1 - y0 < ty1 - ty0:
            raise ConfigError(f"check zone '{zone_id}' lies partly outside the camera frame")
        self._templates = {label: class_template(taught.crops[label]) for label in LABELS}
        kernel = np.ones((3, 3), np.uint8)
        self._ranges = {
            label: (cv2.erode(t, kernel), cv2.dilate(t, kernel))
            for label, t in self._templates.items()
        }
        self._cells_size = (max(1, (x1 - x0) // CELL_PX), max(1, (y1 - y0) // CELL_PX))
        self._previous_cells: F32Array | None = None
        self._noise_levels = CELL_LEVELS / MOVING_K
        self.verdict: Verdict = "undecided"
        self._candidate: Verdict = "undecided"
        self._candidate_since = 0.0
        self._last_report_t_s: float | None = None

    def score(self, image_bgr: U8Array) -> PresenceScore:
        x0, y0, x1, y1 = self._box
        window = cv2.cvtColor(image_bgr[y0:y1, x0:x1], cv2.COLOR_BGR2GRAY).astype(np.float32)
        moving = self._moving_fraction(window)
        best: dict[Label, tuple[float, tuple[int, int]]] = {}
        for label, template in self._templates.items():
            result = cv2.matchTemplate(window, template, cv2.TM_CCOEFF_NORMED)
            _, peak, _, at = cv2.minMaxLoc(result)
            best[label] = (float(peak) if np.isfinite(peak) else 0.0, (int(at[0]), int(at[1])))
        present, absent = best["present"][0], best["absent"][0]
        winner: Label = "present" if present >= absent else "absent"
        covered = self._covered_fraction(window, winner, best[winner][1])
        settings = self.settings
        reason: Reason = "match"
        if moving > MAX_MOVING:
            reason = "moving"
        elif max(present, absent) < settings.min_match:
            reason = "no_match"
        elif abs(present - absent) < settings.min_margin:
            reason = "ambiguous"
        elif covered > MAX_COVERED:
            reason = "covered"
        verdict: Verdict = winner if reason == "match" else "undecided"
        return PresenceScore(verdict, reason, present, absent, covered, moving)

    def decide(
        self, t_s: float, score: PresenceScore, suppressed: bool = False
    ) -> CheckVerdict | None:
        """The verdict to report at ``t_s`` if it changed or was last said ``REPEAT_S`` ago
        (so a check step that starts later still hears it), else None."""
        frame_verdict: Verdict = "undecided" if suppressed else score.verdict
        if frame_verdict != self._candidate:
            self._candidate, self._candidate_since = frame_verdict, t_s
        held_s = t_s - self._candidate_since
        confirmed = held_s >= self.settings.confirm_ms / 1000.0 - 1e-9
        verdict: Verdict = self._candidate if confirmed else "undecided"
        due = (
            self._last_report_t_s is None
            or verdict != self.verdict
            or t_s - self._last_report_t_s >= REPEAT_S - 1e-9
        )
        self.verdict = verdict
        if not due:
            return None
        self._last_report_t_s = t_s
        return CheckVerdict(
            t_s=t_s, zone=self.zone_id, verdict=verdict, margin=round(score.margin, 4)
        )

    def _moving_fraction(self, window: F32Array) -> float:
        cells = np.asarray(
            cv2.resize(window, self._cells_size, interpolation=cv2.INTER_AREA), np.float32
        )
        previous, self._previous_cells = self._previous_cells, cells
        if previous is None:
            return 1.0
        level_now, level_before = float(cells.mean()), float(previous.mean())
        if level_before > 1e-3:
            previous = previous * np.float32(level_now / level_before)
        change = np.abs(cells - previous)
        limit = max(CELL_LEVELS, MOVING_K * self._noise_levels)
        # the zone's frame-to-frame noise: the median change over its cells, followed slowly
        # (at most 10 % up per frame), so one sudden change of the whole zone still counts
        scale = 1.4826 * float(np.median(change))
        self._noise_levels += NOISE_RATE * (
            min(scale, 2.0 * self._noise_levels) - self._noise_levels
        )
        return float(np.mean(change > limit))

    def _covered_fraction(self, window: F32Array, label: Label, at: tuple[int, int]) -> float:
        template = self._templates[label]
        low, high = self._ranges[label]
        height, width = template.shape
        patch = window[at[1] : at[1] + height, at[0] : at[0] + width]
        # least-squares fit patch ~ a * template + b; the template has zero mean, unit variance
        a, b = float(cv2.mean(patch * template)[0]), float(cv2.mean(patch)[0])
        if a < 0:
            low, high = high, low
        below = (np.float32(a) * low + np.float32(b)) - patch
        above = patch - (np.float32(a) * high + np.float32(b))
        return float(np.mean(np.maximum(below, above) > RESIDUAL_LEVELS))
