"""Frames of the demo renderer's sample video with the renderer's own per-frame truth."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

from stationcheck.labels.records import FrameLabel, Point

REPO = Path(__file__).resolve().parents[2]
VIDEO = REPO / "sample_video" / "demo_station.mp4"
TRUTH_CSV = REPO / "sample_video" / "demo_station_truth.csv"


class Truth:
    """The renderer's truth by frame index: tip and rear (image pixels) and tip visibility."""

    def __init__(self) -> None:
        self.tip: dict[int, Point] = {}
        self.rear: dict[int, Point] = {}
        self.visible: dict[int, bool] = {}
        with TRUTH_CSV.open() as handle:
            for row in csv.DictReader(handle):
                index = int(row["frame_index"])
                self.tip[index] = (float(row["tip_x_px"]), float(row["tip_y_px"]))
                self.rear[index] = (float(row["rear_x_px"]), float(row["rear_y_px"]))
                self.visible[index] = row["tip_v"] == "2"

    def click(self, index: int, rng: np.random.Generator, noise_px: float = 1.0) -> FrameLabel:
        """What a careful engineer clicks: the truth plus ``noise_px`` (RMS distance)."""
        if not self.visible[index]:
            return FrameLabel(index, None, None, "clicked")
        sigma = noise_px / np.sqrt(2.0)
        tip = self.tip[index]
        rear = self.rear[index]
        return FrameLabel(
            index,
            (tip[0] + rng.normal(0, sigma), tip[1] + rng.normal(0, sigma)),
            (rear[0] + rng.normal(0, sigma), rear[1] + rng.normal(0, sigma)),
            "clicked",
        )


@pytest.fixture(scope="session")
def truth() -> Truth:
    return Truth()
