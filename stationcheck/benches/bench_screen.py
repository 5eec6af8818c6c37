"""``stationcheck bench --section screen``: what the operator screen costs the frame loop.

The frame loop (bundled model, image judgements, sequencer; no step log) runs on sample-video
frames as fast as it can, without a screen and with two screens connected (each a reader of
the state stream and of the picture stream on 127.0.0.1, as a browser would be), interleaved;
then at camera rate (30 f/s) with two screens, for the screens' pictures/s and the delay from
the loop's hand-over to the picture written to a viewer's socket. Loop frames/s should barely
move; a busy machine moves every figure.
"""

from __future__ import annotations

import http.client
import threading
import time
from typing import TYPE_CHECKING

import numpy as np

from stationcheck.benches.measuring import BenchOptions, BenchRow
from stationcheck.demo_station.files import DEMO_CONFIG

if TYPE_CHECKING:
    from stationcheck.core.plan import StationPlan
    from stationcheck.web.operator.feed import OperatorFeed

SECTION_NAME = "screen"
SECTION_HELP = "operator screen: loop frames/s with and without two screens connected"
SCREENS = 2
ROUNDS = 2
CAMERA_FPS = 30.0
PICTURES_TARGET = ">= 10 pictures/s"
DELAY_TARGET = "p99 < 200 ms"


class _Reader:
    """Reads one stream to the end in its own thread, counting bytes and picture parts."""

    def __init__(self, host: str, port: int, path: str) -> None:
        self.conn = http.client.HTTPConnection(host, port, timeout=10)
        self.conn.request("GET", path)
        self.response = self.conn.getresponse()
        self.parts = 0
        self.bytes = 0
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.thread.start()

    def _run(self) -> None:
        try:
            while chunk := self.response.fp.read1(65536):
                self.bytes += len(chunk)
                self.parts += chunk.count(b"Content-Type: image/jpeg")
        except OSError:
            return

    def close(self) -> None:
        self.conn.close()
        self.thread.join(timeout=5)


def _run_loop(frames: list[np.ndarray], feed: OperatorFeed | None, paced: bool = False) -> float:
    """Loop frames/s, with ``feed`` as a step and frame sink if given; ``paced`` at 30 f/s."""
    from stationcheck.config import load_config
    from stationcheck.core.observations import UnitStarted
    from stationcheck.judgements.station import StationJudgements
    from stationcheck.pipeline.decision_core import DecisionCore
    from stationcheck.pipeline.frame_loop import FrameSink, run_loop
    from stationcheck.pipeline.frame_path import FramePath
    from stationcheck.pipeline.judging import StationImageJudge
    from stationcheck.pipeline.station_inputs import InputSchedule
    from stationcheck.sources.memory_source import MemoryFrameSource
    from stationcheck.vision.detector import load_detector
    from stationcheck.web.operator.pacing import RealTimePacer

    config = load_config(DEMO_CONFIG)
    plan = config.to_plan()
    decisions = DecisionCore(plan, sinks=[feed] if feed is not None else [])
    sinks: list[FrameSink] = [feed] if feed is not None else []
    if paced:
        sinks.append(RealTimePacer(1.0))
    path = FramePath(
        plan,
        load_detector(config.model_path, threads=1),
        decisions,
        [StationImageJudge(StationJudgements.from_config(config))],
    )
    schedule = InputSchedule([UnitStarted(t_s=0.0, serial="BENCH-000001")])
    stats = run_loop(MemoryFrameSource(frames, fps=CAMERA_FPS), path, schedule, sinks)
    return stats.fps


def _watched(
    plan: StationPlan, frames: list[np.ndarray], paced: bool
) -> tuple[float, float, np.ndarray]:
    """Loop frames/s, pictures/s per screen and hand-over -> sent delays (ms) with
    :data:`SCREENS` screens connected."""
    from stationcheck.web.operator.screen import OperatorScreen

    screen = OperatorScreen.start(plan, mode="replay", port=0)
    host, port = screen.server.server_address[:2]
    readers = [
        _Reader(str(host), int(port), path)
        for _ in range(SCREENS)
        for path in ("/api/stream", "/api/video.mjpg")
    ]
    try:
        started = time.perf_counter()
        fps = _run_loop(frames, screen.feed, paced)
        wall_s = time.perf_counter() - started
        sent = np.array(screen.feed.sent_ms, dtype=float)
    finally:
        screen.close()
        for reader in readers:
            reader.close()
    pictures = [r.parts for r in readers[1::2]]
    return fps, min(pictures) / wall_s if wall_s > 0 else 0.0, sent


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.benches.bench_detector import load_frames
    from stationcheck.config import load_config

    frames = load_frames(options.video, options.frames_or(300))
    plan = load_config(DEMO_CONFIG).to_plan()
    alone, watched = [], []
    for _ in range(ROUNDS):  # interleaved, so a busy moment of the machine hits both
        alone.append(_run_loop(frames, None))
        watched.append(_watched(plan, frames, paced=False)[0])
    paced_fps, per_screen, sent = _watched(plan, frames, paced=True)
    p50 = float(np.percentile(sent, 50)) if sent.size else 0.0
    p99 = float(np.percentile(sent, 99)) if sent.size else 0.0
    return [
        BenchRow(
            SECTION_NAME,
            "loop frames/s as fast as it can, no screen",
            float(np.median(alone)),
            None,
            "f/s",
            extra={"runs": float(ROUNDS)},
        ),
        BenchRow(
            SECTION_NAME,
            f"loop frames/s as fast as it can, {SCREENS} screens",
            float(np.median(watched)),
            None,
            "f/s",
            extra={"runs": float(ROUNDS)},
        ),
        BenchRow(
            SECTION_NAME,
            f"loop frames/s at {CAMERA_FPS:.0f} f/s, {SCREENS} screens",
            paced_fps,
            None,
            "f/s",
        ),
        BenchRow(
            SECTION_NAME,
            f"pictures/s of the slower screen at {CAMERA_FPS:.0f} f/s",
            per_screen,
            None,
            "p/s",
            PICTURES_TARGET,
        ),
        BenchRow(
            SECTION_NAME, "hand-over -> picture written to a viewer", p50, p99, "ms", DELAY_TARGET
        ),
    ]
