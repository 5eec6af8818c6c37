"""The client link against a real pymodbus server on 127.0.0.1.

Frame layout per the Modbus Messaging on TCP/IP Implementation Guide V1.0b, 3.1.3: an MBAP
header of 7 bytes (transaction id, protocol id 0, length, unit id) before the PDU. Function codes
per the Modbus Application Protocol Specification V1.1b3 (modbus.org): 6.2 Read Discrete Inputs
0x02; 6.3 Read Holding Registers 0x03; 6.5 Write Single Coil 0x05, output value 0xFF00 for ON and
0x0000 for OFF; 6.12 Write Multiple Registers 0x10. Section numbers from memory.
"""

from __future__ import annotations

import pytest

from stationcheck.core.observations import LinkStatus, TighteningResult, UnitStarted
from stationcheck.errors import SignalLinkError
from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.server_host import ServerHost
from stationcheck.plc.signals import InputSignals, OutputSignals
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.plc.conftest import PacketLog, free_port, wait_until


def client_for(server: ServerHost, timeout_ms: float = 100.0) -> ModbusClientLink:
    return ModbusClientLink(server.host, server.port, timeout_ms=timeout_ms)


@pytest.mark.parametrize(("on", "value_bytes"), [(True, b"\xff\x00"), (False, b"\x00\x00")])
def test_enable_coil_is_function_05_with_spec_value(server: ServerHost, packets: PacketLog,
                                                     on: bool, value_bytes: bytes) -> None:
    link = client_for(server)
    link.connect()
    try:
        link.write_outputs(OutputSignals(tool_enable=on, heartbeat=7))
    finally:
        link.close()
    coil_writes = [pdu for pdu in packets.pdus() if pdu[0] == 0x05]
    assert coil_writes == [b"\x05\x00\x00" + value_bytes]  # FC 05, address 0, value
    assert server.get("coil", 0) == [int(on)]
    register_writes = [pdu for pdu in packets.pdus() if pdu[0] == 0x10]
    # heartbeat..unit_reason in one FC 16 request (Modbus Application Protocol V1.1b3, 6.12:
    # starting address, quantity of registers)
    assert len(register_writes) == 1
    assert register_writes[0][1:5] == b"\x00\x00\x00\x0c"  # start 0, 12 registers
    assert server.get("holding_register", 0, 12) == [7] + [0] * 11


def test_outputs_land_at_their_addresses(server: ServerHost) -> None:
    link = client_for(server)
    link.connect()
    link.write_outputs(OutputSignals(tool_enable=True, heartbeat=65535, step_number=3,
                                     position_number=2, unit_status=1, alarm_code=6,
                                     rework_mask=0b101, unit_ack=4, result_ack=11,
                                     result_status=3, event_code=31, event_count=2,
                                     unit_reason=1))
    link.close()
    assert server.get("holding_register", 0, 12) == [65535, 3, 2, 1, 6, 0b101, 4, 11, 3, 31,
                                                     2, 1]


def test_inputs_are_read_and_decoded(server: ServerHost) -> None:
    presented = InputSignals(tool_running=True, operator_ack=False, reset=True, unit_sequence=3,
                             rework=True, serial="PC-000042", result_sequence=17,
                             result_ok=True, torque_nm=12.34, angle_deg=-35.7)
    for name, words in presented.words().items():
        spec = client_for(server).address_map[name]
        server.set(spec.table, spec.address, words)
    link = client_for(server)
    link.connect()
    try:
        assert link.read_inputs() == presented
    finally:
        link.close()


def test_connect_to_nothing_raises_link_error() -> None:
    link = ModbusClientLink("127.0.0.1", free_port(), timeout_ms=50)
    with pytest.raises(SignalLinkError, match="no Modbus server"):
        link.connect()


def test_worker_result_handshake_and_enable(server: ServerHost) -> None:
    worker = LinkWorker(client_for(server), settings=WorkerSettings(stale_outputs_s=5.0)).start()
    seen: list[object] = []
    try:
        wait_until(lambda: seen.extend(worker.take()) or LinkStatus in map(type, seen),
                   what="link up")
        worker.publish(OutputSignals(tool_enable=True, heartbeat=1))
        wait_until(lambda: server.get("coil", 0) == [1], what="enable coil on")
        for name, words in InputSignals(unit_sequence=1, serial="PC-000001").words().items():
            spec = worker.link.address_map[name]  # type: ignore[attr-defined]
            server.set(spec.table, spec.address, words)
        wait_until(lambda: seen.extend(worker.take()) or UnitStarted in map(type, seen),
                   what="unit start")
        server.set("holding_register", 29, [0, 512, 300])  # NOK, 5.12 N*m, 30.0 deg
        server.set("holding_register", 28, [1])  # the sequence last: the result is complete
        wait_until(lambda: seen.extend(worker.take()) or TighteningResult in map(type, seen),
                   what="tightening result")
        worker.publish(OutputSignals(tool_enable=False, heartbeat=2,
                                     unit_ack=worker.decoder.unit_ack,
                                     result_ack=worker.decoder.result_ack))
        wait_until(lambda: server.get("holding_register", 6, 2) == [1, 1], what="acks echoed")
    finally:
        worker.stop()
    result = next(o for o in seen if isinstance(o, TighteningResult))
    assert (result.ok, result.torque_nm, result.angle_deg, result.sequence) == (
        False, 5.12, 30.0, 1)
    assert server.get("coil", 0) == [0]  # stop writes the enable off


def test_worker_writes_only_changed_outputs_and_keeps_reading_inputs(
        server: ServerHost, packets: PacketLog) -> None:
    def requests(code: int) -> int:
        return sum(1 for pdu in packets.pdus() if pdu[0] == code)

    worker = LinkWorker(client_for(server), settings=WorkerSettings(
        cycle_s=0.02, refresh_s=60.0, stale_outputs_s=60.0)).start()
    try:
        worker.publish(OutputSignals(tool_enable=True, heartbeat=1))
        # the enable goes out only once the link is up (the first write may carry it off)
        wait_until(lambda: server.get("holding_register", 0) == [1]
                   and server.get("coil", 0) == [1], what="first outputs")
        coil_writes = requests(0x05)
        for _ in range(5):  # the loop publishes every cycle; nothing changed
            worker.publish(OutputSignals(tool_enable=True, heartbeat=1))
        worker.publish(OutputSignals(tool_enable=True, heartbeat=2))
        wait_until(lambda: server.get("holding_register", 0) == [2], what="changed outputs")
        assert requests(0x05) == coil_writes  # the enable did not change: no FC 05
        reads = requests(0x02)  # FC 02 read discrete inputs: tool running, ack, reset
        wait_until(lambda: requests(0x02) >= reads + 3, what="inputs read with nothing to write")
        assert requests(0x05) == coil_writes
        worker.publish(OutputSignals(tool_enable=False, heartbeat=2))
        wait_until(lambda: server.get("coil", 0) == [0], what="enable off")
        assert requests(0x05) == coil_writes + 1  # FC 05 (6.5) once for the change
    finally:
        worker.stop()


def test_worker_drops_enable_when_the_loop_stops_publishing(server: ServerHost) -> None:
    worker = LinkWorker(client_for(server),
                        settings=WorkerSettings(stale_outputs_s=0.05)).start()
    try:
        worker.publish(OutputSignals(tool_enable=True))
        wait_until(lambda: server.get("coil", 0) == [1], what="enable on")
        # nothing published any more: within the stale limit plus a cycle the enable is off
        wait_until(lambda: server.get("coil", 0) == [0], timeout_s=1.0, what="enable off")
    finally:
        worker.stop()


def test_killed_server_gives_link_loss_then_reconnect(packets: PacketLog) -> None:
    port = free_port()
    first = ServerHost("127.0.0.1", port).start()
    worker = LinkWorker(ModbusClientLink("127.0.0.1", port, timeout_ms=100),
                        settings=WorkerSettings(backoff_first_s=0.02, backoff_max_s=0.1)).start()
    seen: list[object] = []

    def statuses() -> list[bool]:
        seen.extend(worker.take())
        return [o.ok for o in seen if isinstance(o, LinkStatus)]

    try:
        wait_until(lambda: statuses() == [True], what="link up")
        first.stop()
        wait_until(lambda: statuses() == [True, False], what="link loss")
        assert not worker.up
        second = ServerHost("127.0.0.1", port).start()
        try:
            worker.publish(OutputSignals(tool_enable=False, heartbeat=99))
            wait_until(lambda: statuses() == [True, False, True], what="reconnect")
            wait_until(lambda: second.get("holding_register", 0) == [99], what="writes resume")
        finally:
            worker.stop()
            second.stop()
    finally:
        worker.stop()
    assert worker.connects == 2


def test_inputs_come_in_one_read_per_table(server: ServerHost, packets: PacketLog) -> None:
    """Three bits (FC 02, 6.2) and holding registers 16-32 (FC 03, 6.3): two requests."""
    link = client_for(server)
    link.connect()
    try:
        link.read_inputs()
    finally:
        link.close()
    reads = [(pdu[0], pdu[1:5]) for pdu in packets.pdus()]
    assert sorted(reads) == [(0x02, b"\x00\x00\x00\x03"), (0x03, b"\x00\x10\x00\x11")]
