"""The server-mode map read and written by Debian's ``mbpoll``, a Modbus master the project did
not write, playing the PLC (and an HMI).

Function codes mbpoll uses here (Modbus Application Protocol Specification V1.1b3): Read Coils
0x01 (6.1), Read Holding Registers 0x03 (6.3), Write Single Coil 0x05 (6.5), Write Single
Register 0x06 (6.6), Write Multiple Registers 0x10 (6.12). ``-0`` makes mbpoll use PDU addresses
(from 0), as the address map does. The unit id travels in the MBAP header (Modbus Messaging on
TCP/IP Implementation Guide V1.0b, 3.1.3).

The test plays the station's loop: what the link worker decodes goes through the real sequencer
of the demo station, and its outputs, encoded, go back into the image.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import pytest

from stationcheck.config import load_config
from stationcheck.core.alarms import ALARMS
from stationcheck.core.observations import LinkEvent, TighteningResult, UnitStarted
from stationcheck.core.sequencer import Sequencer
from stationcheck.plc.modbus_server import ModbusServerLink
from stationcheck.plc.signals import OutputEncoder, encode_ascii
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.plc.conftest import free_port, wait_until

MBPOLL = shutil.which("mbpoll")
pytestmark = pytest.mark.skipif(MBPOLL is None, reason="Debian's mbpoll is not installed")
CONFIG = Path(__file__).resolve().parents[2] / "configs" / "demo_station.yaml"
TABLE = {"coil": "0", "holding_register": "4"}
LIVENESS, UNIT_SEQUENCE, SERIAL, RESULT_SEQUENCE = 32, 16, 18, 28
UNIT_ACK, RESULT_ACK, EVENT_CODE, EVENT_COUNT = 6, 7, 9, 10
LIVENESS_TIMEOUT_S = 0.3


def mbpoll(port: int, table: str, ref: int, *values: int, count: int = 1,
           unit: int = 1) -> list[int]:
    """One mbpoll call: reads ``count`` values from ``ref``, or writes ``values`` there."""
    assert MBPOLL is not None
    args = [MBPOLL, "-m", "tcp", "-p", str(port), "-a", str(unit), "-0", "-1", "-o", "1",
            "-t", TABLE[table], "-r", str(ref)]
    if not values:
        args += ["-c", str(count)]
    done = subprocess.run([*args, "127.0.0.1", *map(str, values)], capture_output=True,
                          text=True, timeout=10, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    if values:
        assert f"Written {len(values)} references" in done.stdout, done.stdout
        return list(values)
    return [int(v) for v in re.findall(r"^\[\d+\]:\s+(-?\d+)", done.stdout, re.MULTILINE)]


class Station:
    """Server link + link worker + the demo station's sequencer, stepped by the test."""

    def __init__(self) -> None:
        self.link = ModbusServerLink("127.0.0.1", free_port())
        self.worker = LinkWorker(self.link, settings=WorkerSettings(
            cycle_s=0.02, stale_outputs_s=5.0, liveness_timeout_s=LIVENESS_TIMEOUT_S)).start()
        plan = load_config(CONFIG).to_plan()
        self.sequencer = Sequencer(plan)
        self.encoder = OutputEncoder(plan)
        self.state = self.sequencer.initial_state()
        self.seen: list[object] = []
        self.heartbeat = 0
        self.force_enable = False
        wait_until(lambda: self.link.host.running, what="station server listening")

    def cycle(self) -> None:
        found = self.worker.take()
        unit_ack, result_ack = self.worker.acks
        output = None
        for observation in found:
            self.state, output, _ = self.sequencer.step(self.state, observation)
        self.seen.extend(found)
        self.heartbeat += 1
        if output is None:
            _, output, _ = self.sequencer.step(self.state, _tick(self.state))
        signals = self.encoder.encode(output, heartbeat=self.heartbeat, unit_ack=unit_ack,
                                      result_ack=result_ack)
        if self.force_enable:  # as if the sequencer had enabled a position
            from dataclasses import replace
            signals = replace(signals, tool_enable=True)
        self.worker.publish(signals)

    def until(self, condition: object, what: str) -> None:
        def stepped() -> bool:
            self.cycle()
            return bool(condition())  # type: ignore[operator]
        wait_until(stepped, timeout_s=10.0, what=what)

    def stop(self) -> None:
        self.worker.stop()
        self.link.shutdown()


def _tick(state: object) -> object:
    from stationcheck.core.observations import Tick

    return Tick(t_s=getattr(state, "now_t_s", None) or 0.0)


class PlcLiveness:
    """The PLC's scan as mbpoll calls: plc_liveness counted up about every 50 ms."""

    def __init__(self, port: int, start: int = 1) -> None:
        self.port, self.value = port, start
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.wait(0.05):
            mbpoll(self.port, "holding_register", LIVENESS, self.value)
            self.value = (self.value + 1) & 0xFFFF

    def stop(self) -> None:
        self._stop.set()
        self._thread.join(5.0)


@pytest.fixture
def station() -> Iterator[Station]:
    made = Station()
    try:
        yield made
    finally:
        made.stop()


def test_mbpoll_reads_the_enable_and_sees_it_drop_when_the_plc_stops(station: Station) -> None:
    port = station.link.host.port
    plc = PlcLiveness(port)
    try:
        station.until(lambda: station.worker.up, "link up on the PLC's liveness counter")
        station.force_enable = True
        station.until(lambda: mbpoll(port, "coil", 0) == [1], "mbpoll reads enable 1")
        assert mbpoll(port, "coil", 0, unit=0) == [1]  # unit id 0 and 255 answer too
        assert mbpoll(port, "coil", 0, unit=255) == [1]
    finally:
        plc.stop()
    stopped = time.perf_counter()
    # an HMI (mbpoll) reads on; the loop keeps publishing enable 1; the image must drop it
    station.until(lambda: mbpoll(port, "coil", 0) == [0], "enable 0 in the image")
    off_after_s = time.perf_counter() - stopped
    assert LIVENESS_TIMEOUT_S * 0.9 <= off_after_s <= LIVENESS_TIMEOUT_S + 1.0
    for _ in range(3):  # stale coil: read later, still 0
        station.cycle()
        assert mbpoll(port, "coil", 0) == [0]
    assert not station.worker.up
    alarm = ALARMS["plc_not_alive"].number
    assert mbpoll(port, "holding_register", EVENT_CODE) == [alarm]  # the PLC can read why


def test_plc_restart_with_counters_at_zero_takes_every_unit(station: Station) -> None:
    """Counters 5 / 6 -> 0: an alarm, echoes re-synchronised, no phantom result, and units
    1..5 after the restart are each taken and acknowledged (5, the old echo, included)."""
    port = station.link.host.port
    plc = PlcLiveness(port, start=100)
    try:
        station.until(lambda: station.worker.up, "link up")
        mbpoll(port, "holding_register", SERIAL, *encode_ascii("PC-000005", 10))
        mbpoll(port, "holding_register", RESULT_SEQUENCE, 6)
        mbpoll(port, "holding_register", UNIT_SEQUENCE, 5)
        station.until(lambda: mbpoll(port, "holding_register", UNIT_ACK) == [5], "unit 5 acked")
        plc.stop()  # the PLC restarts: counters back to 0
        before_restart = len(station.seen)
        mbpoll(port, "holding_register", UNIT_SEQUENCE, 0)
        mbpoll(port, "holding_register", RESULT_SEQUENCE, 0)
        plc = PlcLiveness(port, start=0)
        station.until(lambda: any(isinstance(o, LinkEvent) and o.code == "plc_session_restart"
                                  for o in station.seen), "session restart seen")
        station.until(lambda: mbpoll(port, "holding_register", EVENT_CODE) ==
                      [ALARMS["plc_session_restart"].number], "restart readable by the PLC")
        station.until(lambda: mbpoll(port, "holding_register", RESULT_ACK) == [0],
                      "result echo re-synchronised to 0")
        for n in range(1, 6):
            mbpoll(port, "holding_register", SERIAL, *encode_ascii(f"PC-10000{n}", 10))
            mbpoll(port, "holding_register", UNIT_SEQUENCE, n)
            station.until(lambda n=n: mbpoll(port, "holding_register", UNIT_ACK) == [n],
                          f"unit {n} acknowledged")
    finally:
        plc.stop()
    serials = [o.serial for o in station.seen if isinstance(o, UnitStarted)]
    assert serials == ["PC-000005"] + [f"PC-10000{n}" for n in range(1, 6)]
    after = station.seen[before_restart:]
    assert not any(isinstance(o, TighteningResult) for o in after)  # no phantom result


def test_a_garbage_serial_is_refused_with_an_event_the_plc_reads(station: Station) -> None:
    port = station.link.host.port
    plc = PlcLiveness(port)
    try:
        station.until(lambda: station.worker.up, "link up")
        count = mbpoll(port, "holding_register", EVENT_COUNT)[0]
        mbpoll(port, "holding_register", SERIAL, *([0xFFFF] * 10))  # an unset string in a PLC
        mbpoll(port, "holding_register", UNIT_SEQUENCE, 1)
        station.until(lambda: mbpoll(port, "holding_register", UNIT_ACK) == [1], "unit acked")
        station.until(lambda: mbpoll(port, "holding_register", EVENT_CODE, count=2) ==
                      [ALARMS["serial_refused"].number, count + 1], "refusal readable")
    finally:
        plc.stop()
    assert not any(isinstance(o, UnitStarted) for o in station.seen)
