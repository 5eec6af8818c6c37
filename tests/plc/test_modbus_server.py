"""The station as Modbus server, polled by a real pymodbus client playing the PLC (loopback).

Request layout per the Modbus Application Protocol Specification V1.1b3: the PLC reads the
enable with Read Coils (0x01) and writes inputs with Write Multiple Registers (0x10) and
Write Single Coil (0x05, ON = 0xFF00).
"""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from pymodbus.client import ModbusTcpClient

from stationcheck.core.observations import ToolRunning, UnitStarted
from stationcheck.plc.modbus_server import ModbusServerLink
from stationcheck.plc.signals import OutputSignals, encode_ascii
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.plc.conftest import free_port, wait_until


@pytest.fixture
def station() -> Iterator[tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]]:
    # long enough that a slow poll on a busy test machine is not a lost link
    link = ModbusServerLink("127.0.0.1", free_port(), silence_ms=400.0)
    worker = LinkWorker(link, settings=WorkerSettings(backoff_first_s=0.01, backoff_max_s=0.02,
                                                      stale_outputs_s=5.0)).start()
    wait_until(lambda: link.host.running, what="station server listening")
    plc = ModbusTcpClient("127.0.0.1", port=link.host.port, timeout=1.0, retries=0)
    assert plc.connect()  # type: ignore[no-untyped-call]
    try:
        yield link, worker, plc
    finally:
        plc.close()  # type: ignore[no-untyped-call]
        worker.stop()
        link.shutdown()


def test_polling_plc_reads_enable_and_writes_inputs(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]) -> None:
    _, worker, plc = station
    seen: list[object] = []

    def poll_until(condition: object) -> None:
        def polled() -> bool:
            plc.read_coils(0, count=1, device_id=1)
            seen.extend(worker.take())
            return bool(condition())  # type: ignore[operator]
        wait_until(polled, what="condition while the PLC polls")

    poll_until(lambda: worker.up)
    worker.publish(OutputSignals(tool_enable=True, heartbeat=5))
    poll_until(lambda: plc.read_coils(0, count=1, device_id=1).bits[0])
    assert plc.read_holding_registers(0, count=1, device_id=1).registers == [5]
    plc.write_registers(17, [0, *encode_ascii("PC-000777", 10)], device_id=1)
    plc.write_register(16, 1, device_id=1)  # the strobe last
    plc.write_coil(16, True, device_id=1)  # tool_running in server mode
    poll_until(lambda: any(isinstance(o, ToolRunning) for o in seen))
    starts = [o for o in seen if isinstance(o, UnitStarted)]
    assert [s.serial for s in starts] == ["PC-000777"]


def test_plc_that_stops_polling_is_a_lost_link(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]) -> None:
    _, worker, plc = station
    wait_until(lambda: plc.read_coils(0, count=1, device_id=1) and worker.up, what="link up")
    wait_until(lambda: not worker.up, timeout_s=2.0, what="silence noticed")
    assert "not polling" in worker.last_error
