"""Which frames of a video to ask the engineer to click first: spread over time and looks.

Half of the proposals are spaced evenly in time (so every part of the work is seen); the other
half are chosen by farthest-point sampling on 32x24 grey thumbnails (each next frame is the one
least like every frame chosen so far), so rare looks (the tool at a far bin, put down, a fast
move) are not missed. Thumbnails are taken every ``step`` frames to keep it quick.
"""

from __future__ import annotations

from collections.abc import Iterable

import cv2
import numpy as np
import numpy.typing as npt

THUMB_SIZE_PX = (32, 24)


def thumbnail(image: npt.NDArray[np.uint8]) -> npt.NDArray[np.float32]:
    grey = image if image.ndim == 2 else cv2.cvtColor(image, cv2.COLOR_BGR2GRAY)
    small = cv2.resize(grey, THUMB_SIZE_PX, interpolation=cv2.INTER_AREA).astype(np.float32)
    small -= float(small.mean())  # light drifting over the shift is not a new look
    return small.reshape(-1) / 255.0


def propose(frames: Iterable[tuple[int, npt.NDArray[np.uint8]]], count: int) -> list[int]:
    """``count`` frame indices (sorted) out of ``frames`` (index, image), spread over time and
    appearance; fewer when there are fewer frames."""
    indices: list[int] = []
    thumbs: list[npt.NDArray[np.float32]] = []
    for index, image in frames:
        indices.append(index)
        thumbs.append(thumbnail(image))
    if count <= 0 or not indices:
        return []
    if count >= len(indices):
        return sorted(indices)
    features = np.stack(thumbs)
    even = max(1, count // 2)
    chosen = {round(k) for k in np.linspace(0, len(indices) - 1, even)}
    nearest = np.full(len(indices), np.inf, dtype=np.float64)
    for position in chosen:
        nearest = np.minimum(nearest, _distances(features, position))
    while len(chosen) < count:
        position = int(np.argmax(nearest))
        if nearest[position] <= 0.0:
            break
        chosen.add(position)
        nearest = np.minimum(nearest, _distances(features, position))
    return sorted(indices[p] for p in chosen)


def _distances(features: npt.NDArray[np.float32], position: int) -> npt.NDArray[np.float64]:
    distances: npt.NDArray[np.float64] = np.linalg.norm(
        features - features[position], axis=1
    ).astype(np.float64)
    return distances
