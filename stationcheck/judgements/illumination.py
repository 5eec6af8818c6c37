"""How much brighter or darker the whole scene is than in the reference frame.

The light at a station drifts (daylight, lamps warming up, a door opening). The bin judgement
divides each frame by this gain before comparing it with its learned empty-bin appearance, so
a slow or sudden change of overall light is not taken for a hand in the bin.
"""

from __future__ import annotations

import cv2
import numpy as np
import numpy.typing as npt

CELL_PX = 16
STRIDE_PX = 4  # cells are averaged from every 4th pixel in each direction
MIN_LEVEL = 24.0  # cells darker than this in the reference say little about the gain
GAIN_RANGE = (0.25, 4.0)


class GainMeter:
    """Median over coarse cells of (cell mean now) / (cell mean in the reference frame).

    Cells are large and the median ignores up to half of them, so an arm crossing the frame or
    a part lying on the bench does not move the estimate much.
    """

    def __init__(self, reference_bgr: npt.NDArray[np.uint8]) -> None:
        self._size = _cells_size(reference_bgr)
        cells = self._cells(reference_bgr)
        self._usable = cells >= MIN_LEVEL
        self._inverse = np.zeros_like(cells)
        self._inverse[self._usable] = 1.0 / cells[self._usable]

    def gain(self, image_bgr: npt.NDArray[np.uint8]) -> float:
        if not self._usable.any():
            return 1.0
        cells = self._cells(image_bgr)
        ratio = cells[self._usable] * self._inverse[self._usable]
        return float(np.clip(np.median(ratio), *GAIN_RANGE))

    def _cells(self, image_bgr: npt.NDArray[np.uint8]) -> npt.NDArray[np.float32]:
        height, width = image_bgr.shape[:2]
        sparse = cv2.resize(image_bgr, (max(1, width // STRIDE_PX), max(1, height // STRIDE_PX)),
                            interpolation=cv2.INTER_NEAREST)
        grey = cv2.cvtColor(sparse, cv2.COLOR_BGR2GRAY)
        cells = cv2.resize(grey, self._size, interpolation=cv2.INTER_AREA)
        return np.asarray(cells, np.float32)


def _cells_size(image: npt.NDArray[np.uint8]) -> tuple[int, int]:
    height, width = image.shape[:2]
    return max(1, width // CELL_PX), max(1, height // CELL_PX)
