"""The station simulator driven through the real client link (pymodbus both ends, loopback)."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from stationcheck.core.observations import (
    LinkStatus,
    OperatorAck,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.signals import OutputSignals
from stationcheck.plc.simulator import SimulatorSettings, StationSimulator
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.plc.conftest import free_port, wait_until

# the run lasts well over the worker's 50 ms input cycle, as a real run does
FAST = SimulatorSettings(seed=3, ok_rate=0.5, trigger_delay_s=(0.0, 0.01), run_time_s=0.15,
                         unit_gap_s=0.01, units=2)


def test_generated_units_and_results_follow_the_enable() -> None:
    with StationSimulator("127.0.0.1", free_port(), FAST) as sim:
        worker = LinkWorker(ModbusClientLink("127.0.0.1", sim.port, timeout_ms=200),
                            settings=WorkerSettings(stale_outputs_s=5.0)).start()
        seen: list[object] = []
        try:
            def collect(kind: type) -> int:
                seen.extend(worker.take())
                return sum(isinstance(o, kind) for o in seen)

            wait_until(lambda: collect(UnitStarted) == 1, what="first serial")
            assert not any(isinstance(o, ToolRunning) for o in seen)  # no enable, no run
            heartbeat = 0

            def enabled(on: bool) -> OutputSignals:  # the heartbeat counts, as a station's does
                nonlocal heartbeat
                heartbeat += 1
                return OutputSignals(tool_enable=on, heartbeat=heartbeat, unit_status=1,
                                     unit_ack=worker.decoder.unit_ack,
                                     result_ack=worker.decoder.result_ack)

            for position in range(1, 4):
                def resulted(p: int = position) -> bool:
                    worker.publish(enabled(True))
                    return collect(TighteningResult) == p

                wait_until(resulted, what="a result")
                worker.publish(enabled(False))
            def finished() -> bool:
                nonlocal heartbeat
                heartbeat += 1
                worker.publish(OutputSignals(heartbeat=heartbeat, unit_status=3,
                                             unit_ack=worker.decoder.unit_ack,
                                             result_ack=worker.decoder.result_ack))
                return collect(UnitStarted) == 2

            wait_until(finished, what="second serial")
        finally:
            worker.stop()
    serials = [o.serial for o in seen if isinstance(o, UnitStarted)]
    assert serials == ["PC-000001", "PC-000002"]
    results = [o for o in seen if isinstance(o, TighteningResult)]
    assert [r.sequence for r in results] == [1, 2, 3]
    for result in results:
        assert result.torque_nm is not None and result.angle_deg is not None
        target = 5.0 if result.ok else 3.0
        assert abs(result.torque_nm - target) < 0.5  # noise sigma 0.08 N*m
        assert abs(result.angle_deg - 30.0) < 12.0  # noise sigma 2 degrees
    runs = [o.on for o in seen if isinstance(o, ToolRunning)]
    assert runs == [True, False] * 3


def test_scripted_mode_presents_the_inputs_in_order() -> None:
    # the link reads every few ms; each state lasts 0.3 s so a busy machine still sees it
    script = [UnitStarted(t_s=0.0, serial="PC-000101"), ToolRunning(t_s=0.3, on=True),
              ToolRunning(t_s=0.6, on=False),
              TighteningResult(t_s=0.6, ok=True, torque_nm=5.02, angle_deg=27.9, sequence=1),
              OperatorAck(t_s=0.9)]
    sim = StationSimulator("127.0.0.1", free_port(), script=script).serve()
    worker = LinkWorker(ModbusClientLink("127.0.0.1", sim.port, timeout_ms=200)).start()
    seen: list[object] = []
    try:
        # the worker's first read takes the result baseline: connect before the script starts
        wait_until(lambda: worker.up, what="link up")
        sim.begin()
        wait_until(lambda: seen.extend(worker.take()) or
                   any(isinstance(o, OperatorAck) for o in seen), what="script end")
    finally:
        worker.stop()
        sim.stop()
    kinds = [type(o).__name__ for o in seen if not isinstance(o, LinkStatus)]
    assert kinds == ["UnitStarted", "ToolRunning", "ToolRunning", "TighteningResult",
                     "OperatorAck"]
    result = next(o for o in seen if isinstance(o, TighteningResult))
    assert (result.ok, result.torque_nm, result.angle_deg) == (True, 5.02, 27.9)


def _serving(port: int) -> bool:
    try:
        with socket.create_connection(("127.0.0.1", port), timeout=0.2):
            return True
    except OSError:
        return False


@pytest.mark.skipif(not hasattr(signal, "SIGSTOP"), reason="needs POSIX signals")
def test_frozen_simulator_process_is_detected_within_the_timeout(tmp_path: Path) -> None:
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "stationcheck", "simulate", "--port", str(port), "--seed", "1"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    timeout_ms = 50.0
    worker = LinkWorker(ModbusClientLink("127.0.0.1", port, timeout_ms=timeout_ms),
                        settings=WorkerSettings(backoff_first_s=0.02, backoff_max_s=0.1))
    try:
        wait_until(lambda: _serving(port), timeout_s=20.0, what="simulator process listening")
        worker.start()
        wait_until(lambda: worker.up, what="link up")
        os.kill(proc.pid, signal.SIGSTOP)
        frozen_at = time.perf_counter()
        wait_until(lambda: not worker.up, timeout_s=2.0, what="frozen PLC noticed")
        noticed_s = time.perf_counter() - frozen_at
        # one request's timeout plus one link cycle, with slack for a busy 2-core machine
        assert noticed_s < 0.5, noticed_s
        statuses = [o.ok for o in worker.take() if isinstance(o, LinkStatus)]
        assert statuses == [True, False]
        os.kill(proc.pid, signal.SIGCONT)
        wait_until(lambda: worker.up, timeout_s=5.0, what="reconnect after thaw")
    finally:
        worker.stop()
        os.kill(proc.pid, signal.SIGCONT)
        proc.terminate()
        proc.wait(10)


@pytest.mark.parametrize(("args", "problem"), [(["--ok-rate", "1.5"], "ok_rate"),
                                               (["--ok-rate", "-0.1"], "ok_rate")])
def test_simulate_command_refuses_bad_settings(args: list[str], problem: str,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    from stationcheck.cli import main

    assert main(["simulate", "--port", str(free_port()), *args]) == 64
    assert problem in capsys.readouterr().err


def test_simulator_settings_table() -> None:
    assert SimulatorSettings(ok_rate=0.0).ok_rate == 0.0
    assert SimulatorSettings(ok_rate=1.0, trigger_delay_s=(0.0, 0.0)).ok_rate == 1.0
    with pytest.raises(ValueError, match="trigger_delay_s"):
        SimulatorSettings(trigger_delay_s=(0.5, 0.1))


def start_scripted(tmp_path: Path, serial: str, *extra: str
                   ) -> tuple[subprocess.Popen[str], ModbusClientLink]:
    """``simulate --inputs`` with a one-line script (a unit start at 0 s) in a child process,
    and a client link to it that has told it the station is alive, so the script has run."""
    script = tmp_path / "inputs.jsonl"
    script.write_text(f'{{"t_s": 0.0, "kind": "unit_started", "serial": "{serial}", '
                      '"rework": false}\n')
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "stationcheck", "simulate", "--port", str(port),
         "--inputs", str(script), *extra],
        stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    link = ModbusClientLink("127.0.0.1", port, timeout_ms=200)
    try:
        wait_until(lambda: _serving(port), timeout_s=20.0, what="simulator process listening")
        link.connect()
        link.write_outputs(OutputSignals(heartbeat=1))  # the station is alive: the script runs
    except BaseException:
        stop(proc, link)
        raise
    return proc, link


def stop(proc: subprocess.Popen[str], link: ModbusClientLink) -> None:
    link.close()
    if proc.poll() is None:
        proc.terminate()
    proc.wait(10)
    if proc.stdout is not None:
        proc.stdout.close()


def test_a_scripted_simulator_keeps_serving_after_its_script(tmp_path: Path) -> None:
    """The station's dry run ends with its video, not with the PLC gone: after the script's
    last input the simulator still answers, until it is told to stop."""
    proc, link = start_scripted(tmp_path, "PC-000009")
    lines: list[str] = []
    reader = threading.Thread(target=lambda: lines.extend(proc.stdout or ()), daemon=True)
    reader.start()
    try:
        wait_until(lambda: any("script done" in line for line in lines), timeout_s=10.0,
                   what="the script's end")
        assert "script done (1 units, 0 results)" in lines[-1]
        assert link.read_inputs().serial == "PC-000009"  # still answering after the script
        assert proc.poll() is None
    finally:
        link.close()
        proc.terminate()
        reader.join(5)
        stop(proc, link)
    assert proc.returncode == 0
    assert "station simulator stopped" in lines[-1]


def test_a_scripted_simulator_told_to_exit_after_its_script_does(tmp_path: Path) -> None:
    proc, link = start_scripted(tmp_path, "PC-000010", "--exit-after-script")
    try:
        assert proc.wait(20) == 0  # ends by itself once the script is done
    finally:
        stop(proc, link)


def test_a_station_that_stops_leaves_the_simulated_tool_without_power() -> None:
    """The station dies with the enable coil left at 1 in the PLC: the simulator (as a PLC
    should) drops tool power once the heartbeat has not changed for heartbeat_timeout_s, and
    the run in progress ends without a result."""
    settings = SimulatorSettings(seed=5, trigger_delay_s=(0.0, 0.0), run_time_s=30.0,
                                 heartbeat_timeout_s=0.2, liveness_period_s=0.02)
    with StationSimulator("127.0.0.1", free_port(), settings) as sim:
        station = ModbusClientLink("127.0.0.1", sim.port, timeout_ms=500)
        station.connect()
        beat = 0

        def alive() -> bool:
            nonlocal beat
            beat += 1
            station.write_outputs(OutputSignals(tool_enable=True, heartbeat=beat))
            return sim.inputs.tool_running

        liveness = sim.liveness
        wait_until(alive, what="the tool runs while the heartbeat counts")
        assert sim.liveness > liveness  # the simulated PLC counts its liveness register
        station.close()  # killed: no more heartbeats, the enable stays 1 in the PLC
        stopped = time.perf_counter()
        wait_until(lambda: not sim.inputs.tool_running, timeout_s=3.0, what="tool stopped")
        stopped_after_s = time.perf_counter() - stopped
        assert sim.output("tool_enable") == 1  # the coil alone would have let it run on
    assert 0.2 <= stopped_after_s < 1.5, stopped_after_s
    assert (sim.power_drops, sim.results) == (1, 0)
