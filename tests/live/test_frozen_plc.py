"""A frozen PLC (the simulator process stopped with SIGSTOP): the live loop keeps taking
frames at their rate and inhibits the tool within the link timeout; after SIGCONT the link
comes back by itself."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pytest

from stationcheck.live.grabber import FrameGrabber
from stationcheck.live.linked_station import LiveLoop
from stationcheck.live.watchdog import WatchdogLimits
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.pipeline.frame_path import FramePath
from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.live.conftest import AT_A, PLAN, StallingSource, detector_at
from tests.live.test_live_loop import run_in_thread
from tests.plc.conftest import free_port, wait_until
from tests.plc.test_simulator import _serving

TIMEOUT_MS = 50.0
FPS = 100.0


@pytest.mark.skipif(not hasattr(signal, "SIGSTOP"), reason="needs POSIX signals")
def test_frozen_plc_inhibits_while_frames_keep_coming() -> None:
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "stationcheck", "simulate", "--port", str(port),
         "--serials", "PC-000900"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    source = StallingSource(frames=3000, fps=FPS)
    try:
        wait_until(lambda: _serving(port), timeout_s=20.0, what="simulator listening")
        path = FramePath(PLAN, detector_at(AT_A, source.frames), DecisionCore(PLAN))
        grabber = FrameGrabber(lambda: source, pace=True, retry=False).start()
        worker = LinkWorker(ModbusClientLink("127.0.0.1", port, timeout_ms=TIMEOUT_MS),
                            settings=WorkerSettings(backoff_first_s=0.02, backoff_max_s=0.1))
        limits = WatchdogLimits(link_timeout_s=3 * TIMEOUT_MS / 1000.0)
        loop = LiveLoop(path, grabber, worker.start(), limits=limits)
        thread, box = run_in_thread(loop)
        try:
            wait_until(lambda: loop.decisions.last_output is not None
                       and loop.decisions.last_output.tool_enabled, what="enable")
            os.kill(proc.pid, signal.SIGSTOP)
            frozen_at = time.perf_counter()
            frames_at_freeze = loop.stats.frames
            wait_until(lambda: not loop.decisions.last_output.tool_enabled,  # type: ignore[union-attr]
                       timeout_s=2.0, what="inhibit")
            inhibit_s = time.perf_counter() - frozen_at
            # link timeout (3 requests) plus one loop cycle; slack for a busy 2-core machine
            assert inhibit_s < limits.link_timeout_s + 0.15, inhibit_s
            assert "link_lost" in loop.decisions.last_output.alarms  # type: ignore[union-attr]
            held_s = 0.3
            deadline = time.perf_counter() + held_s
            wait_until(lambda: time.perf_counter() > deadline, what="frozen for a while")
            # frames kept coming at their rate while the PLC was frozen (at least half of it)
            assert loop.stats.frames - frames_at_freeze >= FPS * held_s * 0.5
            os.kill(proc.pid, signal.SIGCONT)
            wait_until(lambda: loop.watchdogs.link_ok is True, timeout_s=5.0,
                       what="link back after SIGCONT")
        finally:
            source.release.set()
            thread.join(5.0)
            assert not thread.is_alive(), "the live loop did not end"
        assert "error" not in box
    finally:
        os.kill(proc.pid, signal.SIGCONT)
        proc.terminate()
        proc.wait(10)
