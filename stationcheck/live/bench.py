"""``stationcheck bench --section live``: the live loop on loopback.

Frames of the sample video are fed at 30 frames/s through the grabber into the full frame path
(bundled model, image judgements, sequencer, SQLite step log) and out through the Modbus TCP
client link to a pymodbus server on 127.0.0.1 (in this process). Decision latency runs from
the frame in the grabber's hand to the station outputs written (the enable coil first, then
the status registers), so it includes the detector; output latency runs from the decision
taken to the outputs written (the link alone); loop capacity is 1000 / the mean per-frame processing time.
"""

from __future__ import annotations

import socket
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

from stationcheck.commands.bench import BenchOptions, BenchRow

SECTION_NAME = "live"
SECTION_HELP = "live loop on loopback: frame in hand -> outputs written to a Modbus server"
CONFIG = Path(__file__).resolve().parents[2] / "configs" / "demo_station.yaml"
CAMERA_FPS = 30.0
LATENCY_TARGET = "p99 <= 10 ms"
CAPACITY_TARGET = ">= 120 frames/s (4x 30)"


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.config import load_config
    from stationcheck.judgements.station import StationJudgements
    from stationcheck.live.grabber import FrameGrabber
    from stationcheck.live.loop import LiveLoop
    from stationcheck.pipeline.decisions import DecisionCore
    from stationcheck.pipeline.frame_path import FramePath
    from stationcheck.pipeline.judging import StationImageJudge
    from stationcheck.pipeline.log_sink import StepLogSink
    from stationcheck.plc.modbus_client import ModbusClientLink
    from stationcheck.plc.server_host import ServerHost
    from stationcheck.plc.worker import LinkWorker
    from stationcheck.sources.memory_source import MemoryFrameSource
    from stationcheck.store.sqlite_log import SqliteStepLog
    from stationcheck.vision.detector import load_detector
    from stationcheck.vision.detector_bench import load_frames

    config = load_config(CONFIG)
    plan = config.to_plan()
    images = load_frames(options.video, options.frames)
    detector = load_detector(options.model or config.model_path, threads=options.threads[0])
    with tempfile.TemporaryDirectory() as folder, \
            ServerHost("127.0.0.1", _free_port()) as server:
        log = SqliteStepLog(Path(folder) / "bench.sqlite")
        try:
            decisions = DecisionCore(plan, sinks=[StepLogSink(log)])
            path = FramePath(plan, detector, decisions,
                             [StationImageJudge(StationJudgements.from_config(config))])
            grabber = FrameGrabber(lambda: MemoryFrameSource(images, fps=CAMERA_FPS),
                                   pace=True, retry=False).start()
            worker = LinkWorker(ModbusClientLink(server.host, server.port, timeout_ms=100))
            loop = LiveLoop(path, grabber, worker.start())
            started = time.perf_counter()
            stats = loop.run()
            wall_s = time.perf_counter() - started
            latency = np.array(worker.write_latency_ms, dtype=float)
            output_latency = np.array(worker.publish_latency_ms, dtype=float)
        finally:
            log.close()
    process = np.array(stats.process_ms, dtype=float)
    capacity_fps = 1000.0 / float(process.mean()) if process.size else 0.0
    p50, p99 = float(np.percentile(latency, 50)), float(np.percentile(latency, 99))
    out50, out99 = (float(np.percentile(output_latency, 50)),
                    float(np.percentile(output_latency, 99)))
    figures = {
        "output_latency_p50_ms": out50,
        "output_latency_p99_ms": out99,
        "decision_latency_p50_ms": p50,
        "decision_latency_p99_ms": p99,
        "live_loop_fps": stats.frames / wall_s,
        "live_capacity_fps": capacity_fps,
        "live_headroom_x": capacity_fps / CAMERA_FPS,
        "live_frames_dropped": float(grabber.counts.dropped),
    }
    return [
        BenchRow(SECTION_NAME, "decision latency: frame in hand -> outputs written", p50, p99,
                 "ms", LATENCY_TARGET, extra=figures),
        BenchRow(SECTION_NAME, "decision taken -> outputs written (link only)", out50, out99,
                 "ms", LATENCY_TARGET),
        BenchRow(SECTION_NAME, "frame path per frame (detector..step log)",
                 float(statistics.median(stats.process_ms)), float(np.percentile(process, 99)),
                 "ms"),
        BenchRow(SECTION_NAME, f"loop frames/s fed at {CAMERA_FPS:.0f}", stats.frames / wall_s,
                 None, "f/s", extra={"dropped": float(grabber.counts.dropped)}),
        BenchRow(SECTION_NAME, "loop capacity (1000 / mean per-frame ms)", capacity_fps, None,
                 "f/s", CAPACITY_TARGET),
    ]
