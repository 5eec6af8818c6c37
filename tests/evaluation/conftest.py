"""Factories for labelled frames and predictions."""

from __future__ import annotations

import numpy as np


def rows(
    tip: tuple[float, float, float], rear: tuple[float, float, float] = (0, 0, 0)
) -> np.ndarray:
    return np.array([tip, rear], dtype=np.float64)
