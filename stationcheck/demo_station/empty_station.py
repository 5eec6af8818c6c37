"""The demo station with nobody at it (demo data): the still scene the frozen-picture check must
not mistake for a frozen camera. Same scene, camera, exposure drift and sensor noise as the
sample video; optionally through the same mp4v encoder and back."""

from __future__ import annotations

import math
import tempfile
from collections.abc import Iterator
from pathlib import Path

import cv2
import numpy as np

from stationcheck.core.records import Frame
from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import Camera, CameraTransform, Exposure
from stationcheck.demo_station.sample_video import LENS_BLUR_PX, NOISE_SIGMA
from stationcheck.demo_station.station_scene import REFERENCE_STATE, StationScene
from stationcheck.errors import InputFileError


def empty_station_frames(
    seconds: float, seed: int = 7, fps: float = layout.FPS, encoded: bool = True
) -> Iterator[Frame]:
    """``seconds`` of the empty station; ``encoded`` passes them through an mp4v file first."""
    camera = Camera(
        layout.FRAME_WIDTH_PX,
        layout.FRAME_HEIGHT_PX,
        seed + 5,
        NOISE_SIGMA,
        lens_blur_px=LENS_BLUR_PX,
    )
    scene = StationScene().image(REFERENCE_STATE)
    count = round(seconds * fps)

    def develop(index: int) -> np.ndarray:
        t = index / fps
        exposure = Exposure(
            1.0 + 0.035 * math.sin(2 * math.pi * t / 19.0) + 0.012 * math.sin(2 * math.pi * t / 4.3)
        )
        rng = np.random.default_rng((seed, index))
        return camera.develop(scene, CameraTransform(), exposure, rng)

    if not encoded:
        for index in range(count):
            yield Frame(index, index / fps, develop(index))
        return
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "empty.mp4"
        size = (layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX)
        writer = cv2.VideoWriter(str(path), cv2.VideoWriter.fourcc(*"mp4v"), fps, size)
        if not writer.isOpened():
            raise InputFileError(f"cannot open a video writer for {path}")
        try:
            for index in range(count):
                writer.write(develop(index))
        finally:
            writer.release()
        capture = cv2.VideoCapture(str(path))
        try:
            index = 0
            while True:
                ok, image = capture.read()
                if not ok:
                    break
                yield Frame(index, index / fps, np.ascontiguousarray(image))
                index += 1
        finally:
            capture.release()
