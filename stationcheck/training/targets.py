"""Training targets: Gaussian heatmaps laid out by the model contract's cell convention."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from stationcheck.vision.heatmap_decode import input_px_to_cell


def gaussian_heatmaps(
    points_input_px: npt.NDArray[np.floating],
    present: npt.NDArray[np.bool_],
    height_cells: int,
    width_cells: int,
    stride: int,
    sigma_cells: float,
) -> npt.NDArray[np.float32]:
    """``K x H x W`` targets: a peak-1 Gaussian at each present point, zeros elsewhere.

    ``points_input_px`` is ``K x 2`` (x, y) in model-input pixels; a point outside the input
    still contributes its tail if it is within 3 sigma of the border.
    """
    k = points_input_px.shape[0]
    out = np.zeros((k, height_cells, width_cells), np.float32)
    xs = np.arange(width_cells, dtype=np.float32)
    ys = np.arange(height_cells, dtype=np.float32)
    for i in range(k):
        if not present[i]:
            continue
        cx = input_px_to_cell(float(points_input_px[i, 0]), stride)
        cy = input_px_to_cell(float(points_input_px[i, 1]), stride)
        if not (-3 * sigma_cells <= cx <= width_cells - 1 + 3 * sigma_cells):
            continue
        if not (-3 * sigma_cells <= cy <= height_cells - 1 + 3 * sigma_cells):
            continue
        gx = np.exp(-((xs - cx) ** 2) / (2 * sigma_cells**2))
        gy = np.exp(-((ys - cy) ** 2) / (2 * sigma_cells**2))
        out[i] = np.outer(gy, gx)
    return out
