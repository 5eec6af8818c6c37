"""Writing frames from a source into a video file (mp4v in .mp4: the encoder OpenCV's wheels
carry; H.264 does not open there).

Only an explicit ``stationcheck record`` does this: the station stores no video otherwise.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import cv2

from stationcheck.errors import InputFileError
from stationcheck.sources.frame_source import FrameSource

log = logging.getLogger(__name__)

VIDEO_SUFFIX = ".mp4"
FOURCC = "mp4v"


@dataclass(frozen=True)
class Recording:
    path: Path
    frames: int
    fps: float
    width_px: int
    height_px: int


def record(
    source: FrameSource,
    target: Path,
    max_frames: int,
    progress: Callable[[int], None] | None = None,
) -> Recording:
    """Up to ``max_frames`` frames of ``source`` into ``target`` (written under a temporary
    name and renamed when complete, so a broken recording never looks finished).

    Raises:
        InputFileError: the writer cannot be opened, the source gives no frame, or the frame
            size changes part-way.
    """
    if target.suffix.lower() != VIDEO_SUFFIX:
        raise InputFileError(f"a recording is an {VIDEO_SUFFIX} file, not {target.name}")
    temporary = target.with_name(f".{target.stem}.recording{VIDEO_SUFFIX}")
    writer: cv2.VideoWriter | None = None
    size: tuple[int, int] | None = None
    count = 0
    try:
        for frame in source:
            height, width = frame.image.shape[:2]
            if writer is None:
                size = (width, height)
                target.parent.mkdir(parents=True, exist_ok=True)
                fourcc = cv2.VideoWriter.fourcc(*FOURCC)
                writer = cv2.VideoWriter(str(temporary), fourcc, source.fps, size)
                if not writer.isOpened():
                    raise InputFileError(f"cannot open a video writer for {target}")
            elif (width, height) != size:
                raise InputFileError(
                    f"{source.name}: the frame size changed from {size} to {(width, height)}"
                )
            writer.write(frame.image)
            count += 1
            if progress is not None:
                progress(count)
            if count >= max_frames:
                break
    except BaseException:
        if writer is not None:
            writer.release()
        temporary.unlink(missing_ok=True)
        raise
    if writer is None or size is None:
        raise InputFileError(f"{source.name} gave no frame")
    writer.release()
    os.replace(temporary, target)
    log.info("recorded %d frames to %s", count, target)
    return Recording(target, count, source.fps, size[0], size[1])
