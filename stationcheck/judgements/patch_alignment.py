"""Where did the reference frame's corner patches go? Normalised cross-correlation per patch.

The strongest corners of the reference frame outside every zone (Shi and Tomasi, "Good features
to track", CVPR 1994, as OpenCV's ``goodFeaturesToTrack``) are cut out as small patches at half
resolution. In a live frame each patch is looked for within ``SEARCH_PX`` of where it was by
normalised cross-correlation (``TM_CCOEFF_NORMED``; Lewis 1995), refined to a fraction of a
pixel with a parabola through the peak. Each patch is compared with its own mean and spread
removed, so light level, colour cast and a smooth vignette, which scale a small patch nearly
uniformly, do not change the match; averaging over the patch's 225 pixels carries it through
sensor noise and JPEG blocks far better than binary feature descriptors, which flip in flat,
dark areas. A match counts only with a correlation of at least ``MIN_PEAK``.
"""

from __future__ import annotations

from collections.abc import Sequence

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.judgements.zone_window import U8Array

F64Array = npt.NDArray[np.float64]
HALF_PX = 7  # patches are 15 x 15 at half resolution
SEARCH_PX = 20  # at half resolution: moves of up to about 40 px in the frame
MAX_PATCHES = 40
MIN_DISTANCE_PX = 10
MIN_PEAK = 0.6
Circle = tuple[float, float, float]


class PatchAligner:
    """Patches of a grey half-resolution reference; :meth:`match` finds them in a live frame."""

    def __init__(self, reference_half: U8Array, static_mask: U8Array, scale: float) -> None:
        self.scale = scale
        margin = HALF_PX + SEARCH_PX
        mask = static_mask.copy()
        mask[:margin, :] = 0
        mask[-margin:, :] = 0
        mask[:, :margin] = 0
        mask[:, -margin:] = 0
        mask = np.asarray(
            cv2.erode(mask, np.ones((2 * HALF_PX + 1, 2 * HALF_PX + 1), np.uint8)), np.uint8
        )
        found = cv2.goodFeaturesToTrack(
            reference_half, MAX_PATCHES, 0.01, MIN_DISTANCE_PX, mask=mask, blockSize=7
        )
        points = (
            np.zeros((0, 2), np.int32)
            if found is None
            else np.round(found.reshape(-1, 2)).astype(np.int32)
        )
        self.points_half = points
        ref = reference_half.astype(np.float32)
        self._patches = [
            ref[y - HALF_PX : y + HALF_PX + 1, x - HALF_PX : x + HALF_PX + 1].copy()
            for x, y in points
        ]
        self.last_peaks: F64Array = np.zeros(0)

    @property
    def count(self) -> int:
        return len(self._patches)

    def match(
        self, live_half: U8Array, ignore_circles_px: Sequence[Circle] = ()
    ) -> tuple[F64Array, F64Array]:
        """(reference points, live points) in full-resolution pixels of the patches found."""
        live = live_half.astype(np.float32)
        src, dst, peaks = [], [], []
        for (x, y), patch in zip(self.points_half, self._patches, strict=True):
            full = (x / self.scale, y / self.scale)
            if any(
                (full[0] - cx) ** 2 + (full[1] - cy) ** 2 <= r * r
                for cx, cy, r in ignore_circles_px
            ):
                continue
            window = live[
                y - HALF_PX - SEARCH_PX : y + HALF_PX + SEARCH_PX + 1,
                x - HALF_PX - SEARCH_PX : x + HALF_PX + SEARCH_PX + 1,
            ]
            result = cv2.matchTemplate(window, patch, cv2.TM_CCOEFF_NORMED)
            _, peak, _, at = cv2.minMaxLoc(result)
            peaks.append(peak)
            if not np.isfinite(peak) or peak < MIN_PEAK:
                continue
            dx, dy = _subpixel(np.asarray(result, np.float32), at)
            src.append(full)
            dst.append(
                (
                    (x + at[0] + dx - SEARCH_PX) / self.scale,
                    (y + at[1] + dy - SEARCH_PX) / self.scale,
                )
            )
        self.last_peaks = np.asarray(peaks, np.float64)
        return np.asarray(src, np.float64).reshape(-1, 2), np.asarray(dst, np.float64).reshape(
            -1, 2
        )


def _subpixel(result: npt.NDArray[np.float32], at: Sequence[int]) -> tuple[float, float]:
    ax, ay = int(at[0]), int(at[1])
    offsets = []
    for before, peak, after, inside in (
        (
            result[ay, ax - 1] if ax > 0 else 0.0,
            result[ay, ax],
            result[ay, ax + 1] if ax < result.shape[1] - 1 else 0.0,
            0 < ax < result.shape[1] - 1,
        ),
        (
            result[ay - 1, ax] if ay > 0 else 0.0,
            result[ay, ax],
            result[ay + 1, ax] if ay < result.shape[0] - 1 else 0.0,
            0 < ay < result.shape[0] - 1,
        ),
    ):
        curve = float(before) - 2.0 * float(peak) + float(after)
        shift = 0.5 * (float(before) - float(after)) / curve if inside and curve < 0 else 0.0
        offsets.append(float(np.clip(shift, -0.5, 0.5)))
    return offsets[0], offsets[1]
