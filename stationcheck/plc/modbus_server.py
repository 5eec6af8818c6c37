"""The station as Modbus TCP server: the PLC polls it (reads the outputs, writes the inputs).

For PLCs that can only be Modbus clients. The station's outputs live in its own register image,
written by the link worker in the same step that decides them (the enable off included, the
moment the link stops being up); the inputs are whatever the PLC last wrote there. Who polls
says nothing about the PLC being alive (an HMI may read on after the PLC stopped): the link is up
only while the PLC's ``plc_liveness`` register keeps changing (see the link worker).

Unit id: Modbus TCP clients address the station as 0 or 255 (the usual choices for a device
reached directly over TCP) or by the configured ``plc.device_id``; all three are answered from the
one image. Any other id gets exception 0x0B (gateway target device failed to respond).
"""

from __future__ import annotations

import logging

from stationcheck.plc.address_map import AddressMap, default_address_map
from stationcheck.plc.link import TableLink
from stationcheck.plc.server_host import ServerHost, Table

logger = logging.getLogger(__name__)

DIRECT_UNIT_IDS = (0, 255)


class ModbusServerLink(TableLink):
    name = "server"
    write_unchanged = True  # the image is local: every write puts all outputs back in place

    def __init__(
        self, host: str, port: int, *, device_id: int = 1, address_map: AddressMap | None = None
    ) -> None:
        super().__init__(address_map or default_address_map(server=True))
        self.host = ServerHost(
            host,
            port,
            size=max(64, self.address_map.highest_address()),
            device_id=device_id,
            unit_ids=frozenset({device_id, *DIRECT_UNIT_IDS}),
        )

    def connect(self) -> None:
        if not self.host.running:  # started once; it keeps serving across link losses
            self.host.start()
            logger.info(
                "Modbus server for the PLC on %s:%d (unit ids %s)",
                self.host.host,
                self.host.port,
                ", ".join(map(str, sorted(self.host.unit_ids))),
            )

    def close(self) -> None:
        """The server keeps running: the PLC may come back at any time."""

    def shutdown(self) -> None:
        self.host.stop()

    def read_table(self, table: Table, address: int, count: int) -> list[int]:
        return self.host.get(table, address, count)

    def write_coil(self, address: int, on: bool) -> None:
        self.host.set("coil", address, [int(on)])

    def write_registers(self, address: int, values: list[int]) -> None:
        self.host.set("holding_register", address, values)
