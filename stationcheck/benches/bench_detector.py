"""The detector section of ``stationcheck bench``: preprocess, inference and decode times per
640x480 frame at each thread count, frames per second, and resident memory."""

from __future__ import annotations

import logging
from pathlib import Path
from typing import TYPE_CHECKING

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame
from stationcheck.demo_station.files import SAMPLE_VIDEO

if TYPE_CHECKING:
    from stationcheck.benches.measuring import BenchOptions, BenchRow

logger = logging.getLogger(__name__)

DEFAULT_FRAMES = 300
SECTION_NAME = "detector"
SECTION_HELP = "keypoint detector: preprocess + inference + decode per 640x480 frame"
WARMUP_FRAMES = 20
TARGET_TOTAL_MS = "median <= 3 ms (1 thread)"


MAX_DISTINCT_FRAMES = 120  # ~110 MB of 640x480 frames; longer runs cycle through them


def load_frames(video: Path | None, count: int) -> list[npt.NDArray[np.uint8]]:
    """Up to :data:`MAX_DISTINCT_FRAMES` consecutive video frames, repeated to ``count`` (so
    memory stays that of a station, not of a frame buffer); seeded noise when there is no
    video."""
    path = video or SAMPLE_VIDEO
    frames: list[npt.NDArray[np.uint8]] = []
    capture = cv2.VideoCapture(str(path)) if path.is_file() else None
    while capture is not None and len(frames) < min(count, MAX_DISTINCT_FRAMES):
        ok, image = capture.read()
        if not ok:
            break
        if image.shape[:2] != (480, 640):
            image = cv2.resize(image, (640, 480))
        frames.append(np.asarray(image, np.uint8))
    if capture is not None:
        capture.release()
    if not frames:
        logger.warning("no video at %s; timing on seeded noise frames", path)
        rng = np.random.default_rng(0)
        frames = [
            rng.integers(0, 256, (480, 640, 3), dtype=np.uint8) for _ in range(min(count, 50))
        ]
    distinct = len(frames)
    while len(frames) < count:
        frames.extend(frames[: min(distinct, count - len(frames))])
    return frames


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.benches.measuring import BenchRow, resident_memory_mb
    from stationcheck.vision.detector import load_detector

    images = load_frames(options.video, options.frames_or(DEFAULT_FRAMES))
    rows: list[BenchRow] = []
    for threads in options.threads:
        detector = load_detector(options.model, threads=threads)
        stages: dict[str, list[float]] = {
            "preprocess": [],
            "inference": [],
            "decode": [],
            "total": [],
        }
        hint = None
        refined = 0
        warmup = images[:WARMUP_FRAMES]
        for index, image in enumerate(warmup + images):
            result = detector.detect(Frame(index, index / 30.0, image), hint)
            tip = result.get("tip")
            hint = (tip.x_px, tip.y_px) if tip is not None and tip.score >= 0.5 else None
            if index < len(warmup):
                continue
            t = detector.last_timings
            stages["preprocess"].append(t.preprocess_ms)
            stages["inference"].append(t.inference_ms)
            stages["decode"].append(t.decode_ms)
            stages["total"].append(t.total_ms)
            refined += t.refined
        label = f"{threads} thread{'s' if threads > 1 else ''}"
        for stage, values in stages.items():
            arr = np.asarray(values)
            rows.append(
                BenchRow(
                    SECTION_NAME,
                    f"{stage} ({label})",
                    float(np.median(arr)),
                    float(np.percentile(arr, 99)),
                    "ms",
                    TARGET_TOTAL_MS if stage == "total" and threads == 1 else "",
                    headline=(
                        {"detector_ms_median": float(np.median(arr))}
                        if stage == "total" and threads == options.threads[0]
                        else {}
                    ),
                )
            )
        total = float(np.median(stages["total"]))
        rows.append(
            BenchRow(
                SECTION_NAME,
                f"frames per second ({label})",
                1000.0 / total,
                None,
                "fps",
                extra={"refined_share": refined / len(images)},
            )
        )
    current, peak = resident_memory_mb()
    rows.append(
        BenchRow(
            SECTION_NAME,
            "resident memory (process)",
            current,
            None,
            "MB",
            "< 400 MB whole pipeline",
            extra={"peak_mb": peak},
        )
    )
    return rows
