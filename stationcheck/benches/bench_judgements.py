"""The image-judgements section of ``stationcheck bench``: CPU time per frame of each judgement.

Costs are CPU time of the calling thread (``time.thread_time``) with OpenCV held to one thread,
so other load on the machine inflates them little. "amortised" is the mean over all frames: the
camera check runs only every ``interval_ms`` (and when a bin turns active), so its median per
frame is near zero while its mean carries its real share.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import cv2
import numpy as np

from stationcheck.config import load_config
from stationcheck.config.schema import StationConfig
from stationcheck.demo_station.files import DEMO_CONFIG, SAMPLE_VIDEO
from stationcheck.judgements.judgement_trace import JudgementTrace, run_judgements, video_frames
from stationcheck.judgements.station import COST_NAMES, StationJudgements

if TYPE_CHECKING:
    from stationcheck.benches.measuring import BenchOptions, BenchRow

logger = logging.getLogger(__name__)

DEFAULT_FRAMES = 300
SECTION_NAME = "judgements"
SECTION_HELP = "image judgements: bin activity, check-zone presence, camera shift per frame"
TARGET = "all judgements < 2 ms amortised (one core)"
TARGET_MEDIAN = "all judgements <= 2 ms median per frame (one core)"


@dataclass(frozen=True)
class JudgementCosts:
    """Per judgement: median, p99 and mean (amortised) ms per frame; camera ms per check."""

    frames: int
    median_ms: dict[str, float]
    p99_ms: dict[str, float]
    mean_ms: dict[str, float]
    camera_checks: int
    camera_check_ms: float
    total_median_ms: float = 0.0
    total_p99_ms: float = 0.0

    @property
    def total_mean_ms(self) -> float:
        return sum(self.mean_ms.values())


def measure_costs(config: StationConfig, video: Path, frames: int) -> JudgementCosts:
    """Run the judgements of ``config`` over the first ``frames`` frames of ``video``."""
    threads = cv2.getNumThreads()
    cv2.setNumThreads(1)
    try:
        judgements = StationJudgements.from_config(config, clock=time.thread_time)
        trace = run_judgements(judgements, video_frames(video, config.camera.fps, frames))
    finally:
        cv2.setNumThreads(threads)
    return costs_of(trace)


def costs_of(trace: JudgementTrace) -> JudgementCosts:
    values = {name: np.asarray(trace.costs_ms[name], np.float64) for name in COST_NAMES}
    camera = values["camera_shift"]
    ran = camera[np.asarray(trace.camera_checked, bool)]
    return JudgementCosts(
        frames=trace.frames,
        median_ms={n: float(np.median(v)) for n, v in values.items()},
        p99_ms={n: float(np.percentile(v, 99)) for n, v in values.items()},
        mean_ms={n: float(np.mean(v)) for n, v in values.items()},
        camera_checks=len(ran),
        camera_check_ms=float(np.median(ran)) if len(ran) else 0.0,
        total_median_ms=float(np.median(trace.total_costs_ms())) if trace.frames else 0.0,
        total_p99_ms=float(np.percentile(trace.total_costs_ms(), 99)) if trace.frames else 0.0,
    )


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.benches.measuring import BenchRow
    from stationcheck.errors import InputFileError

    video = options.video or SAMPLE_VIDEO
    if not video.is_file():
        raise InputFileError(f"{video}: no video to measure the judgements on")
    costs = measure_costs(load_config(DEMO_CONFIG), video, options.frames_or(DEFAULT_FRAMES))
    rows = []
    for name in COST_NAMES:
        rows.append(
            BenchRow(
                SECTION_NAME, f"{name} per frame", costs.median_ms[name], costs.p99_ms[name], "ms"
            )
        )
        rows.append(
            BenchRow(
                SECTION_NAME, f"{name} amortised (mean per frame)", costs.mean_ms[name], None, "ms"
            )
        )
    rows.append(
        BenchRow(
            SECTION_NAME,
            "camera_shift per check",
            costs.camera_check_ms,
            None,
            "ms",
            extra={"checks": float(costs.camera_checks)},
        )
    )
    rows.append(
        BenchRow(
            SECTION_NAME,
            "all judgements per frame",
            costs.total_median_ms,
            costs.total_p99_ms,
            "ms",
            TARGET_MEDIAN,
        )
    )
    rows.append(
        BenchRow(
            SECTION_NAME,
            "all judgements amortised per frame",
            costs.total_mean_ms,
            None,
            "ms",
            TARGET,
            extra={"frames": float(costs.frames)},
        )
    )
    return rows
