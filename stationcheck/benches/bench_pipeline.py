"""``stationcheck bench --section pipeline``: the whole per-frame path on the sample video.

Replays the first frames of the sample video with its station inputs as fast as the path goes
(decode -> detector -> tracker and zones -> image judgements -> sequencer -> SQLite step log,
synchronous=FULL) and reports frames/s of the whole path and each stage's median.
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np

from stationcheck.benches.measuring import BenchOptions, BenchRow
from stationcheck.demo_station.files import DEMO_CONFIG, SAMPLE_INPUTS, SAMPLE_VIDEO

SECTION_NAME = "pipeline"
SECTION_HELP = "whole per-frame path on the sample video (replay, no outputs)"
DEFAULT_FRAMES = 600
FPS_TARGET = ">= 150 f/s"


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.pipeline.session import ReplaySettings, run_replay

    frames = options.frames_or(DEFAULT_FRAMES)
    with tempfile.TemporaryDirectory() as folder:
        report = run_replay(
            ReplaySettings(
                config_path=DEMO_CONFIG,
                log_path=Path(folder) / "bench.sqlite",
                video=options.video or SAMPLE_VIDEO,
                inputs=SAMPLE_INPUTS,
                model_path=options.model,
                threads=options.threads[0],
                max_frames=frames,
            )
        )
    stats = report.stats
    medians = stats.medians_ms()
    headline = {"full_path_fps": report.fps}
    headline.update(
        {f"stage_{name}_ms_median": ms for name, ms in medians.items() if name != "outputs"}
    )
    rows = [
        BenchRow(
            SECTION_NAME,
            f"whole path frames/s ({stats.frames} frames)",
            report.fps,
            None,
            "f/s",
            FPS_TARGET,
            headline=headline,
        )
    ]
    for name, values in stats.stage_ms.items():
        if name == "outputs" or not values:
            continue
        rows.append(
            BenchRow(
                SECTION_NAME,
                f"stage {name}",
                float(np.median(values)),
                float(np.percentile(values, 99)),
                "ms",
            )
        )
    return rows
