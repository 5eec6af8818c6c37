"""How good is the camera picture? Brightness, contrast, noise, sharpness and JPEG blockiness.

Measured on the grey frame every ``INTERVAL_S`` (the figures change slowly):

* brightness: mean grey level; contrast: standard deviation of the grey levels;
* noise: Immerkær's fast noise estimate (Computer Vision and Image Understanding 64(2), 1996):
  the mean absolute response to the mask [[1,-2,1],[-2,4,-2],[1,-2,1]] times sqrt(pi/2)/6,
  taken only where the Sobel gradient is below its 90th percentile, so edges do not count as
  noise (Tai and Yang, "Fast estimation of Gaussian noise", ISCE 2008);
* sharpness: variance of the Laplacian (Pech-Pacheco et al., ICPR 2000), at half resolution
  so sensor noise weighs less;
* blockiness: mean absolute step between neighbouring pixels across the 8-pixel JPEG block
  borders over the same inside the blocks (1.0 for an uncompressed picture; common practice,
  no source).

The thresholds (``judgements.picture_quality`` in the config) decide two things: whether the
camera check can be trusted (light, contrast, noise) and whether bins and check zones can be
judged (all five). The first measurement sets the state; later, a state changes after two
measurements in a row agree.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from stationcheck.config.judgement_settings import PictureQualitySettings
from stationcheck.core.observations import PictureState
from stationcheck.judgements.zone_window import U8Array

INTERVAL_S = 0.25
REPORT_S = 5.0  # the figures go to the step log this often (and on every change of state)
EDGE_PERCENT = 10.0
NOISE_MASK = np.asarray([[1, -2, 1], [-2, 4, -2], [1, -2, 1]], np.float32)
BLOCK_PX = 8


@dataclass(frozen=True)
class QualityFigures:
    brightness: float
    contrast: float
    noise_sigma: float
    sharpness: float
    blockiness: float

    def rounded(self) -> dict[str, float]:
        return {
            "brightness": round(self.brightness, 1),
            "contrast": round(self.contrast, 1),
            "noise_sigma": round(self.noise_sigma, 2),
            "sharpness": round(self.sharpness, 1),
            "blockiness": round(self.blockiness, 3),
        }


def measure_quality(image_bgr: U8Array) -> QualityFigures:
    grey = cv2.cvtColor(image_bgr, cv2.COLOR_BGR2GRAY) if image_bgr.ndim == 3 else image_bgr
    mean, std = cv2.meanStdDev(grey)
    # the noise is measured on a centre crop half the frame's width and height (a quarter of
    # the pixels keeps the cost low; noise is the same everywhere on a sensor)
    height, width = grey.shape[:2]
    centre = grey[height // 4 : height - height // 4, width // 4 : width - width // 4]
    response = np.abs(cv2.filter2D(centre, cv2.CV_16S, NOISE_MASK))[1:-1, 1:-1]
    gradient = cv2.add(
        np.abs(cv2.Sobel(centre, cv2.CV_16S, 1, 0)), np.abs(cv2.Sobel(centre, cv2.CV_16S, 0, 1))
    )[1:-1, 1:-1]
    sample = gradient[::3, ::3].ravel()
    edge = (
        np.partition(sample, int(len(sample) * (1.0 - EDGE_PERCENT / 100.0)))[
            int(len(sample) * (1.0 - EDGE_PERCENT / 100.0))
        ]
        if sample.size
        else 0
    )
    flat = gradient <= edge
    count = int(np.count_nonzero(flat))
    noise = float(response[flat].sum()) / count * math.sqrt(math.pi / 2.0) / 6.0 if count else 0.0
    half = cv2.resize(grey, (width // 2, height // 2), interpolation=cv2.INTER_AREA)
    sharpness = float(cv2.Laplacian(half, cv2.CV_32F).var())
    steps = np.abs(np.diff(grey[::4].astype(np.int16), axis=1))
    columns = np.arange(steps.shape[1])
    across = (columns % BLOCK_PX) == BLOCK_PX - 1
    inside = float(steps[:, ~across].mean())
    blockiness = float(steps[:, across].mean()) / max(inside, 0.5)
    return QualityFigures(float(mean[0, 0]), float(std[0, 0]), noise, sharpness, blockiness)


class QualityMonitor:
    """Measures every ``INTERVAL_S``; :meth:`observe` gives a :class:`PictureState` when the
    verdicts change, and every ``REPORT_S`` with the figures for the step log."""

    def __init__(self, settings: PictureQualitySettings) -> None:
        self.settings = settings
        self.last: QualityFigures | None = None
        self.judgeable = True
        self.camera_checkable = True
        self.picture_checkable = True  # the figures alone allow checking the camera
        self.reason = ""
        self._last_t_s: float | None = None
        self._last_report_t_s: float | None = None
        self._disagree = 0

    def due(self, t_s: float) -> bool:
        return self._last_t_s is None or t_s - self._last_t_s >= INTERVAL_S - 1e-9

    def verdicts(self, figures: QualityFigures) -> tuple[bool, bool, str]:
        """(camera checkable, judgeable, reason) for one measurement."""
        s = self.settings
        camera_reasons = []
        if figures.brightness < s.min_brightness:
            camera_reasons.append("too dark")
        if figures.contrast < s.min_contrast:
            camera_reasons.append("too little contrast")
        if figures.noise_sigma > s.max_noise_sigma:
            camera_reasons.append("too noisy")
        judge_reasons = list(camera_reasons)
        if figures.sharpness < s.min_sharpness:
            judge_reasons.append("too blurred")
        if figures.blockiness > s.max_blockiness:
            judge_reasons.append("too strongly compressed")
        return not camera_reasons, not judge_reasons, ", ".join(judge_reasons)

    def observe(
        self, t_s: float, image_bgr: U8Array, judge_reason: str = "", camera_reason: str = ""
    ) -> PictureState | None:
        """``judge_reason``: another judgement cannot work (e.g. a bin's noise floor is too
        high), so the picture cannot be judged; ``camera_reason``: the camera check cannot
        work, so neither."""
        if not self.due(t_s):
            return None
        self._last_t_s = t_s
        figures = measure_quality(image_bgr)
        first = self.last is None
        self.last = figures
        checkable, judgeable, reason = self.verdicts(figures)
        self.picture_checkable = checkable
        if camera_reason:
            checkable = False
        if judge_reason or camera_reason:
            judgeable = False
        reason = ", ".join(r for r in (reason, camera_reason, judge_reason) if r)
        changed = (checkable, judgeable) != (self.camera_checkable, self.judgeable)
        self._disagree = self._disagree + 1 if changed else 0
        if self._disagree >= 2 or (changed and first):
            self._disagree = 0
            self.camera_checkable, self.judgeable, self.reason = checkable, judgeable, reason
            return self._state(t_s, figures)
        report = self._last_report_t_s
        if report is None or t_s - report >= REPORT_S - 1e-9:
            return self._state(t_s, figures)
        return None

    def _state(self, t_s: float, figures: QualityFigures) -> PictureState:
        self._last_report_t_s = t_s
        return PictureState(
            t_s=t_s,
            judgeable=self.judgeable,
            camera_checkable=self.camera_checkable,
            reason=self.reason,
            **figures.rounded(),
        )
