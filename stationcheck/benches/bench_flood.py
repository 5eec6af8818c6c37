"""``stationcheck bench --section flood``: the live run with its operator screen under a flood.

Two live runs of the sample video against the station simulator, each with the operator screen
served beside the loop as ``run --screen`` does: one quiet, one while a child process floods
the screen with requests that carry no right to write (30 MB bodies posted without the screen's
write header, one after another) and holds 200 idle connections open (re-opening any the screen
closes; ten posts a second). Compared: decision latency (frame in hand -> enable coil written), the loop's
frames/s, the process's peak resident memory, and whether the screen still answers its own
page's requests (``GET /api/state``, timed every 0.2 s).
"""

from __future__ import annotations

import socket
import sys
import tempfile
import threading
import time
import urllib.request
from pathlib import Path

import numpy as np

from stationcheck.benches.measuring import BenchOptions, BenchRow, resident_memory_mb
from stationcheck.demo_station.files import DEMO_CONFIG, SAMPLE_VIDEO

SECTION_NAME = "flood"
SECTION_HELP = "live run with its operator screen, quiet and under a request flood"
DEFAULT_FRAMES = 600
IDLE_CONNECTIONS = 200
POST_BYTES = 30 * 1024 * 1024
POSTS_PER_S = 10.0  # offered: 300 MB/s of bodies the screen must not read


class _Probe:
    """Frame sink sampling memory; a thread timing the screen's own state request."""

    def __init__(self) -> None:
        self.peak_mb = 0.0
        self.frames = 0
        self.answers_ms: list[float] = []
        self.failures = 0
        self.stop = threading.Event()

    def on_frame(self, result: object) -> None:
        self.frames += 1
        if self.frames % 15 == 1:
            self.peak_mb = max(self.peak_mb, resident_memory_mb()[0])

    def on_stop(self, error: BaseException | None) -> None:
        self.peak_mb = max(self.peak_mb, resident_memory_mb()[0])

    def ask(self, url: str) -> None:
        while not self.stop.wait(0.2):
            start = time.perf_counter()
            try:
                with urllib.request.urlopen(f"{url}api/state", timeout=5) as answer:
                    answer.read()
                self.answers_ms.append((time.perf_counter() - start) * 1e3)
            except OSError:
                self.failures += 1


def _run(options: BenchOptions, frames: int, flood: bool) -> tuple[_Probe, list[float], float]:
    import subprocess

    from stationcheck.benches.bench_live import free_port, start_simulator
    from stationcheck.config import load_config
    from stationcheck.live.linked_station import LiveLoop
    from stationcheck.live.session import LiveSettings, run_live
    from stationcheck.web.operator.screen import OperatorScreen

    probe = _Probe()
    screen = OperatorScreen.start(load_config(DEMO_CONFIG).to_plan(), mode="live", port=free_port())
    loops: list[LiveLoop] = []

    def ready(loop: LiveLoop) -> None:
        screen.attach_live(loop)
        loop.frame_sinks = (*loop.frame_sinks, probe)
        loops.append(loop)

    asking = threading.Thread(target=probe.ask, args=(screen.server.url,), daemon=True)
    port = free_port()
    flooder: subprocess.Popen[bytes] | None = None
    with tempfile.TemporaryDirectory() as folder, tempfile.TemporaryFile() as errors:
        simulator = start_simulator(port, errors)
        try:
            if flood:
                flooder = subprocess.Popen(
                    [
                        sys.executable,
                        "-m",
                        "stationcheck.benches.bench_flood",
                        str(screen.server.server_address[1]),
                    ]
                )
            asking.start()
            stats = run_live(
                LiveSettings(
                    config_path=DEMO_CONFIG,
                    log_path=Path(folder) / "bench.sqlite",
                    source=str(options.video or SAMPLE_VIDEO),
                    link="client",
                    host="127.0.0.1",
                    port=port,
                    max_frames=frames,
                    model_path=options.model,
                ),
                on_ready=ready,
            )
        finally:
            probe.stop.set()
            if flooder is not None:
                flooder.terminate()
                flooder.wait(10)
            simulator.terminate()
            simulator.wait(10)
            screen.close()
    return probe, list(loops[0].worker.coil_latency_ms), stats.fps


def measure(options: BenchOptions) -> list[BenchRow]:
    frames = options.frames_or(DEFAULT_FRAMES)
    rows: list[BenchRow] = []
    figures: dict[str, dict[str, float]] = {}
    for label, flood in (("quiet", False), ("flooded", True)):
        probe, latency_ms, fps = _run(options, frames, flood)
        latency = np.array(latency_ms, dtype=float)
        answers = np.array(probe.answers_ms or [float("nan")], dtype=float)
        figures[label] = {
            "p50": float(np.percentile(latency, 50)),
            "p99": float(np.percentile(latency, 99)),
            "rss": probe.peak_mb,
            "fps": fps,
        }
        rows += [
            BenchRow(
                SECTION_NAME,
                f"{label}: decision latency, frame -> coil written",
                figures[label]["p50"],
                figures[label]["p99"],
                "ms",
            ),
            BenchRow(SECTION_NAME, f"{label}: loop frames/s", fps, None, "f/s"),
            BenchRow(SECTION_NAME, f"{label}: resident memory (peak)", probe.peak_mb, None, "MB"),
            BenchRow(
                SECTION_NAME,
                f"{label}: screen's GET /api/state",
                float(np.median(answers)),
                float(np.percentile(answers, 99)),
                "ms",
                "answers while flooded",
                extra={"answered": float(len(probe.answers_ms)), "failed": float(probe.failures)},
            ),
        ]
    quiet, flooded = figures["quiet"], figures["flooded"]
    rows.append(
        BenchRow(
            SECTION_NAME,
            "flooded / quiet: decision latency p50",
            flooded["p50"] / quiet["p50"],
            None,
            "x",
            "within 1.1x",
            extra={
                "p99_ratio": flooded["p99"] / quiet["p99"],
                "memory_ratio": flooded["rss"] / quiet["rss"],
                "fps_ratio": flooded["fps"] / quiet["fps"],
            },
            headline={
                "flood_latency_p50_ratio": flooded["p50"] / quiet["p50"],
                "flood_memory_ratio": flooded["rss"] / quiet["rss"],
            },
        )
    )
    return rows


def flood(port: int) -> None:
    """Post 30 MB bodies without the write header, one after another, and hold
    :data:`IDLE_CONNECTIONS` idle connections (re-opening those the screen closes) until
    killed."""
    threading.Thread(target=_post_forever, args=(port,), daemon=True).start()
    idle: list[socket.socket] = []
    while True:
        for sock in list(idle):  # drop the ones the screen closed for idling or crowding
            try:
                sock.setblocking(False)
                if sock.recv(1) == b"":
                    idle.remove(sock)
                    sock.close()
            except BlockingIOError:
                pass
            except OSError:
                idle.remove(sock)
                sock.close()
        while len(idle) < IDLE_CONNECTIONS:
            try:
                idle.append(socket.create_connection(("127.0.0.1", port), timeout=2))
            except OSError:
                break
        time.sleep(0.5)  # holds them open; no busy loop taking a core of this 2-core machine


def _post_forever(port: int) -> None:
    chunk = b"x" * (1024 * 1024)
    head = (
        f"POST /api/ack HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n"
        f"Content-Type: text/plain\r\nContent-Length: {POST_BYTES}\r\n\r\n"
    ).encode()
    while True:
        time.sleep(1.0 / POSTS_PER_S)  # paced: the flood tests the screen, not this machine
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=5) as post:
                post.sendall(head)
                for _ in range(POST_BYTES // len(chunk)):
                    post.sendall(chunk)
        except OSError:
            pass  # refused before the body: the screen closed the connection


if __name__ == "__main__":
    flood(int(sys.argv[1]))
