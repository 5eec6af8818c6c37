"""The station as Modbus server, polled by a real pymodbus client playing the PLC (loopback).

Request layout per the Modbus Application Protocol Specification V1.1b3: the PLC reads the
enable with Read Coils (0x01, 6.1) and the outputs with Read Holding Registers (0x03, 6.3), and
writes inputs with Write Single Register (0x06, 6.6), Write Multiple Registers (0x10, 6.12) and
Write Single Coil (0x05, 6.5, ON = 0xFF00). Exception code 0x0B "gateway target device failed to
respond" is the spec's section 7 (from memory). The unit identifier is a field of the MBAP
header (Modbus Messaging on TCP/IP Implementation Guide V1.0b, 3.1.3).
"""

from __future__ import annotations

import time
from collections.abc import Iterator

import pytest
from pymodbus.client import ModbusTcpClient

from stationcheck.core.observations import LinkEvent, LinkStatus, ToolRunning, UnitStarted
from stationcheck.plc.modbus_server import ModbusServerLink
from stationcheck.plc.signals import OutputSignals, encode_ascii
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.plc.conftest import free_port, wait_until

LIVENESS = 32  # holding register the PLC counts up


@pytest.fixture
def station() -> Iterator[tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]]:
    link = ModbusServerLink("127.0.0.1", free_port())
    # a timeout long enough that a slow poll on a busy test machine is not a lost link
    worker = LinkWorker(link, settings=WorkerSettings(
        cycle_s=0.02, backoff_first_s=0.01, backoff_max_s=0.02, stale_outputs_s=5.0,
        liveness_timeout_s=0.3)).start()
    wait_until(lambda: link.host.running, what="station server listening")
    plc = ModbusTcpClient("127.0.0.1", port=link.host.port, timeout=1.0, retries=0)
    assert plc.connect()  # type: ignore[no-untyped-call]
    try:
        yield link, worker, plc
    finally:
        plc.close()  # type: ignore[no-untyped-call]
        worker.stop()
        link.shutdown()


class Plc:
    """Counts plc_liveness on every poll, as a PLC program would."""

    def __init__(self, client: ModbusTcpClient, worker: LinkWorker) -> None:
        self.client, self.worker, self.count, self.seen = client, worker, 0, list[object]()

    def poll_until(self, condition: object, what: str = "condition") -> None:
        def polled() -> bool:
            self.count += 1
            self.client.write_register(LIVENESS, self.count, device_id=1)
            self.client.read_coils(0, count=1, device_id=1)
            self.seen.extend(self.worker.take())
            return bool(condition())  # type: ignore[operator]
        wait_until(polled, what=what)

    def enable(self) -> bool:
        return bool(self.client.read_coils(0, count=1, device_id=1).bits[0])


def test_polling_plc_reads_enable_and_writes_inputs(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]) -> None:
    _, worker, client = station
    plc = Plc(client, worker)
    plc.poll_until(lambda: worker.up, "link up")
    worker.publish(OutputSignals(tool_enable=True, heartbeat=5))
    # the coil is written before the registers, so a poll may see the enable a moment earlier
    plc.poll_until(lambda: plc.enable() and client.read_holding_registers(
        0, count=1, device_id=1).registers == [5], "enable on and heartbeat 5")
    client.write_registers(17, [0, *encode_ascii("PC-000777", 10)], device_id=1)
    client.write_register(16, 1, device_id=1)  # the strobe last
    client.write_coil(16, True, device_id=1)  # tool_running in server mode
    plc.poll_until(lambda: any(isinstance(o, ToolRunning) for o in plc.seen), "tool running")
    starts = [o for o in plc.seen if isinstance(o, UnitStarted)]
    assert [s.serial for s in starts] == ["PC-000777"]


def test_plc_stops_while_an_hmi_reads_on_the_image_shows_enable_off(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]) -> None:
    """Reads by anyone (an HMI) do not keep the link up; the enable in the image drops in the
    step that finds the PLC's liveness counter stopped, while the loop still publishes 1."""
    _, worker, client = station
    plc = Plc(client, worker)
    plc.poll_until(lambda: worker.up, "link up")
    worker.publish(OutputSignals(tool_enable=True, heartbeat=1))
    plc.poll_until(plc.enable, "enable on")
    stopped = time.perf_counter()
    beat = 1
    while plc.enable():  # the HMI reads; the loop keeps publishing enable on
        beat += 1
        worker.publish(OutputSignals(tool_enable=True, heartbeat=beat))
        assert time.perf_counter() - stopped < 2.0, "the enable stayed on in the image"
        time.sleep(0.005)  # the HMI's poll period
    off_after_s = time.perf_counter() - stopped
    assert not worker.up
    assert off_after_s >= 0.3  # not before the liveness timeout
    found = worker.take()
    assert LinkStatus(t_s=found[0].t_s, ok=False) in found
    assert any(isinstance(o, LinkEvent) and o.code == "plc_not_alive" for o in found)
    for _ in range(10):  # and it stays off, however often the loop publishes enable on
        worker.publish(OutputSignals(tool_enable=True, heartbeat=beat + 1))
        assert not plc.enable()
    plc.poll_until(lambda: worker.up, "link back once the counter moves")


@pytest.mark.parametrize(("unit_id", "answered"), [(0, True), (1, True), (255, True), (7, False)])
def test_unit_ids_0_255_and_the_configured_one_are_answered(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient], unit_id: int,
        answered: bool) -> None:
    _, worker, client = station
    worker.publish(OutputSignals(heartbeat=4242))
    wait_until(lambda: client.read_holding_registers(0, count=1, device_id=1).registers == [4242])
    response = client.read_holding_registers(0, count=1, device_id=unit_id)
    if answered:
        assert response.registers == [4242]
    else:
        assert response.isError() and response.exception_code == 0x0B


def test_a_fault_reaches_the_image_at_once(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]) -> None:
    """The loop publishes the inhibit (a fault); an outside client reads coil 0 = 0 right after:
    the worker writes the image when woken by the publish, not on the PLC's next poll."""
    _, worker, client = station
    plc = Plc(client, worker)
    plc.poll_until(lambda: worker.up, "link up")
    worker.publish(OutputSignals(tool_enable=True, heartbeat=1))
    plc.poll_until(plc.enable, "enable on")
    published = time.perf_counter()
    worker.publish(OutputSignals(tool_enable=False, heartbeat=2))  # e.g. a detector fault
    wait_until(lambda: not plc.enable(), timeout_s=1.0, what="enable off in the image")
    assert time.perf_counter() - published < 1.0
    assert worker.up  # the link itself is fine


def test_a_plc_that_never_counts_keeps_the_link_down_and_says_why(
        station: tuple[ModbusServerLink, LinkWorker, ModbusTcpClient]) -> None:
    _, worker, client = station
    worker.publish(OutputSignals(tool_enable=True, heartbeat=1))
    wait_until(lambda: "plc_liveness counter stays at 0" in worker.last_error, timeout_s=3.0,
               what="the hint")
    assert not worker.up
    assert client.read_coils(0, count=1, device_id=1).bits[0] is False
