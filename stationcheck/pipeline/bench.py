"""``stationcheck bench --section pipeline``: the whole per-frame path on the sample video.

Replays the first frames of the sample video with its station inputs as fast as the path goes
(decode -> detector -> tracker and zones -> image judgements -> sequencer -> SQLite step log,
synchronous=FULL) and reports frames/s of the whole path and each stage's median.
"""

from __future__ import annotations

import statistics
import tempfile
from pathlib import Path

from stationcheck.commands.bench import BenchOptions, BenchRow

SECTION_NAME = "pipeline"
SECTION_HELP = "whole per-frame path on the sample video (replay, no outputs)"
REPO = Path(__file__).resolve().parents[2]
CONFIG = REPO / "configs" / "demo_station.yaml"
VIDEO = REPO / "sample_video" / "demo_station.mp4"
INPUTS = REPO / "sample_video" / "demo_station_inputs.jsonl"
DEFAULT_FRAMES = 600
FPS_TARGET = ">= 150 f/s"


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.pipeline.session import ReplaySettings, run_replay

    frames = options.frames_or(DEFAULT_FRAMES)
    with tempfile.TemporaryDirectory() as folder:
        report = run_replay(ReplaySettings(
            config_path=CONFIG, log_path=Path(folder) / "bench.sqlite",
            video=options.video or VIDEO, inputs=INPUTS, model_path=options.model,
            threads=options.threads[0], max_frames=frames))
    stats = report.stats
    medians = stats.medians_ms()
    headline = {"full_path_fps": report.fps}
    headline.update({f"stage_{name}_ms_median": ms for name, ms in medians.items()
                     if name != "outputs"})
    rows = [BenchRow(SECTION_NAME, f"whole path frames/s ({stats.frames} frames)", report.fps,
                     None, "f/s", FPS_TARGET, headline=headline)]
    for name, values in stats.stage_ms.items():
        if name == "outputs" or not values:
            continue
        ordered = sorted(values)
        p99 = ordered[min(len(ordered) - 1, round(0.99 * (len(ordered) - 1)))]
        rows.append(BenchRow(SECTION_NAME, f"stage {name}", statistics.median(values), p99,
                             "ms"))
    return rows
