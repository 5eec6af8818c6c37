"""The station as Modbus TCP server: the PLC polls it (reads the outputs, writes the inputs).

For PLCs that can only be Modbus clients. The station's outputs are set in its own register
image; the inputs are whatever the PLC last wrote there. The link counts as up only while the
PLC keeps polling: no request for ``silence_ms`` makes every exchange fail, so the link worker
reports the link lost and the tool is inhibited (a PLC that stops polling cannot see the enable
anyway, and must drop it itself when the heartbeat stops).
"""

from __future__ import annotations

import logging
import time

from stationcheck.errors import SignalLinkError
from stationcheck.plc.address_map import AddressMap, default_address_map
from stationcheck.plc.link import TableLink
from stationcheck.plc.server_host import ServerHost, Table

logger = logging.getLogger(__name__)


class ModbusServerLink(TableLink):
    name = "server"

    def __init__(self, host: str, port: int, *, device_id: int = 1, silence_ms: float = 200.0,
                 address_map: AddressMap | None = None) -> None:
        super().__init__(address_map or default_address_map(server=True))
        self.silence_ms = silence_ms
        self.last_request_s: float | None = None
        self.host = ServerHost(host, port, size=max(64, self.address_map.highest_address()),
                               device_id=device_id, on_packet=self._packet)

    def _packet(self, sending: bool, packet: bytes) -> None:
        if not sending:
            self.last_request_s = time.perf_counter()

    def connect(self) -> None:
        if not self.host.running:  # started once; it keeps serving across link losses
            self.host.start()
            logger.info("Modbus server for the PLC on %s:%d", self.host.host, self.host.port)
        self._check_polled()

    def close(self) -> None:
        """The server keeps running: the PLC may come back at any time."""

    def shutdown(self) -> None:
        self.host.stop()

    def _check_polled(self) -> None:
        last = self.last_request_s
        if last is None or (time.perf_counter() - last) * 1e3 > self.silence_ms:
            raise SignalLinkError("the PLC is not polling the station's Modbus server")

    def read_table(self, table: Table, address: int, count: int) -> list[int]:
        self._check_polled()
        return self.host.get(table, address, count)

    def write_coil(self, address: int, on: bool) -> None:
        self.host.set("coil", address, [int(on)])

    def write_registers(self, address: int, values: list[int]) -> None:
        self.host.set("holding_register", address, values)
