"""Sub-pixel peak decoding of keypoint heatmaps.

The model's ``sigmoid(logit)`` approximates a Gaussian bump, so its logarithm is close to a
quadratic around the peak. Following DARK (Zhang et al., "Distribution-Aware Coordinate
Representation for Human Pose Estimation", CVPR 2020), the centre is one Newton step from the
argmax cell on the log-heatmap: ``offset = -H^-1 g`` with gradient ``g`` and Hessian ``H`` from
central differences. For an exact Gaussian this is exact; where the Hessian is not negative
definite (flat or saddle tops) each axis falls back to a 1-D parabola, and at a border the
offset along that axis is 0. An optional Gaussian smoothing of the log-heatmap (DARK's
"distribution modulation") is available for noisy heatmaps.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

MAX_OFFSET_CELLS = 1.0


@dataclass(frozen=True)
class HeatmapPeak:
    """One keypoint's decoded peak, in heatmap cells (cell centres at integer coordinates)."""

    x_cell: float
    y_cell: float
    peak_logit: float


def log_sigmoid(logits: npt.NDArray[np.floating]) -> npt.NDArray[np.float64]:
    """``log(sigmoid(z))`` without overflow."""
    z = np.asarray(logits, dtype=np.float64)
    return -np.logaddexp(0.0, -z)


def decode_peaks(
    logits: npt.NDArray[np.floating], smooth_sigma_cells: float = 0.0
) -> list[HeatmapPeak]:
    """Decodes each channel of a ``K x H x W`` logit heatmap to a sub-pixel peak."""
    if logits.ndim != 3:
        raise ValueError(f"expected a K x H x W heatmap, got shape {logits.shape}")
    peaks = []
    for channel in logits:
        flat_index = int(np.argmax(channel))
        row, col = divmod(flat_index, channel.shape[1])
        peak_logit = float(channel[row, col])
        dx, dy = refine_offset(channel, row, col, smooth_sigma_cells)
        peaks.append(HeatmapPeak(col + dx, row + dy, peak_logit))
    return peaks


def refine_offset(
    logit_map: npt.NDArray[np.floating], row: int, col: int, smooth_sigma_cells: float = 0.0
) -> tuple[float, float]:
    """Sub-cell offset (dx, dy) of the peak near ``(row, col)`` from the log-heatmap."""
    h, w = logit_map.shape
    r0, r1 = max(row - 3, 0), min(row + 4, h)
    c0, c1 = max(col - 3, 0), min(col + 4, w)
    patch = log_sigmoid(logit_map[r0:r1, c0:c1])
    if smooth_sigma_cells > 0:
        patch = np.asarray(
            cv2.GaussianBlur(patch, (0, 0), smooth_sigma_cells, borderType=cv2.BORDER_REFLECT),
            dtype=np.float64,
        )
    y, x = row - r0, col - c0
    ph, pw = patch.shape
    has_x = 0 < x < pw - 1
    has_y = 0 < y < ph - 1
    centre = patch[y, x]
    gx = 0.5 * (patch[y, x + 1] - patch[y, x - 1]) if has_x else 0.0
    gy = 0.5 * (patch[y + 1, x] - patch[y - 1, x]) if has_y else 0.0
    hxx = patch[y, x + 1] - 2 * centre + patch[y, x - 1] if has_x else 0.0
    hyy = patch[y + 1, x] - 2 * centre + patch[y - 1, x] if has_y else 0.0
    dx = dy = 0.0
    if has_x and has_y:
        hxy = 0.25 * (
            patch[y + 1, x + 1] - patch[y + 1, x - 1] - patch[y - 1, x + 1] + patch[y - 1, x - 1]
        )
        det = hxx * hyy - hxy * hxy
        if hxx < 0 and det > 1e-12:
            dx = -(hyy * gx - hxy * gy) / det
            dy = -(hxx * gy - hxy * gx) / det
            return _clip(dx), _clip(dy)
    if has_x and hxx < 0:
        dx = -gx / hxx
    if has_y and hyy < 0:
        dy = -gy / hyy
    return _clip(dx), _clip(dy)


def _clip(offset: float) -> float:
    return float(min(max(offset, -MAX_OFFSET_CELLS), MAX_OFFSET_CELLS))


def cell_to_input_px(cell: float, stride: int) -> float:
    """Input-pixel coordinate of a heatmap cell coordinate (see the model contract)."""
    return cell * stride + (stride - 1) / 2.0


def input_px_to_cell(input_px: float, stride: int) -> float:
    return (input_px - (stride - 1) / 2.0) / stride
