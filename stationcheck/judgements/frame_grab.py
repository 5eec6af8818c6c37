"""Single frames for teaching and for the camera-shift check: from a video, images or a camera."""

from __future__ import annotations

import logging
import math
from collections.abc import Sequence
from pathlib import Path

import cv2
import numpy as np

from stationcheck.errors import InputFileError
from stationcheck.judgements.zone_window import U8Array

logger = logging.getLogger(__name__)

CAMERA_WARMUP_FRAMES = 10  # let exposure settle before keeping a frame
Grabbed = tuple[U8Array, str]  # BGR frame and a description of where it came from


def frames_from_video(
    path: Path, at_s: float, count: int = 1, every_s: float = 1.0
) -> list[Grabbed]:
    """``count`` frames from ``at_s`` on, ``every_s`` apart.

    Raises:
        InputFileError: the video cannot be opened or ends before a wanted frame.
    """
    if count < 1 or at_s < 0 or every_s <= 0:
        raise InputFileError(
            f"need count >= 1, at >= 0 s and every > 0 s; got {count}, {at_s}, {every_s}"
        )
    capture = cv2.VideoCapture(str(path))
    if not capture.isOpened():
        raise InputFileError(f"{path}: cannot open the video")
    try:
        fps = capture.get(cv2.CAP_PROP_FPS)
        if not math.isfinite(fps) or fps <= 0:
            raise InputFileError(f"{path}: the video does not state its frame rate")
        out: list[Grabbed] = []
        for k in range(count):
            t_s = at_s + k * every_s
            index = round(t_s * fps)
            capture.set(cv2.CAP_PROP_POS_FRAMES, index)
            ok, image = capture.read()
            if not ok or image is None:
                raise InputFileError(f"{path}: no frame at {t_s:.2f} s (frame {index})")
            out.append((np.asarray(image, np.uint8), f"{path.name} frame {index} ({t_s:.2f} s)"))
        return out
    finally:
        capture.release()


def frames_from_images(paths: Sequence[Path]) -> list[Grabbed]:
    """Each image file as a BGR frame.

    Raises:
        InputFileError: a file is missing or not an image.
    """
    out: list[Grabbed] = []
    for path in paths:
        image = cv2.imread(str(path), cv2.IMREAD_COLOR)
        if image is None:
            raise InputFileError(f"{path}: missing or not an image")
        out.append((np.asarray(image, np.uint8), f"image {path.name}"))
    return out


def frame_from_camera(index: int, width_px: int, height_px: int) -> Grabbed:
    """One frame from a camera after a short warm-up.

    Raises:
        InputFileError: the camera cannot be opened or gives no frame.
    """
    capture = cv2.VideoCapture(index)
    if not capture.isOpened():
        raise InputFileError(f"camera {index}: cannot be opened")
    try:
        capture.set(cv2.CAP_PROP_FRAME_WIDTH, width_px)
        capture.set(cv2.CAP_PROP_FRAME_HEIGHT, height_px)
        image = None
        for _ in range(CAMERA_WARMUP_FRAMES + 1):
            ok, image = capture.read()
            if not ok:
                image = None
        if image is None:
            raise InputFileError(f"camera {index}: gives no frames")
        return np.asarray(image, np.uint8), f"camera {index}"
    finally:
        capture.release()
