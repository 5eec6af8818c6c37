"""The station as Modbus TCP client: it writes its outputs into the PLC and reads the PLC's
inputs, every link cycle.

Client is the default because the station then sets the pace: the enable coil is written the
moment a decision is taken (no wait for the PLC's next poll), and the PLC only needs its
standard Modbus server enabled and two blocks mapped. Every call has a short timeout and no
retries of its own (retries multiply the time a frozen PLC blocks the link: (retries+1) x
timeout); the link worker decides about reconnecting.
"""

from __future__ import annotations

import logging
from typing import Any

from stationcheck.errors import SignalLinkError
from stationcheck.plc.address_map import AddressMap
from stationcheck.plc.link import TableLink
from stationcheck.plc.server_host import Table

logger = logging.getLogger(__name__)


class ModbusClientLink(TableLink):
    name = "client"

    def __init__(
        self,
        host: str,
        port: int,
        *,
        device_id: int = 1,
        timeout_ms: float = 50.0,
        retries: int = 0,
        address_map: AddressMap | None = None,
    ) -> None:
        super().__init__(address_map)
        self.host = host
        self.port = port
        self.device_id = device_id
        self.timeout_ms = timeout_ms
        self.retries = retries
        self._client: Any = None

    def connect(self) -> None:
        from pymodbus.client import ModbusTcpClient

        self.close()
        client = ModbusTcpClient(
            self.host, port=self.port, timeout=self.timeout_ms / 1000.0, retries=self.retries
        )
        if not client.connect():  # type: ignore[no-untyped-call]
            client.close()  # type: ignore[no-untyped-call]
            raise SignalLinkError(f"no Modbus server answers on {self.host}:{self.port}")
        self._client = client

    def close(self) -> None:
        if self._client is not None:
            try:
                self._client.close()
            finally:
                self._client = None

    def read_table(self, table: Table, address: int, count: int) -> list[int]:
        client = self._connected()
        method = {
            "coil": client.read_coils,
            "discrete_input": client.read_discrete_inputs,
            "holding_register": client.read_holding_registers,
            "input_register": client.read_input_registers,
        }[table]
        response = self._call(
            f"read {table} {address}", method, address, count=count, device_id=self.device_id
        )
        if table in ("coil", "discrete_input"):
            return [int(bit) for bit in response.bits[:count]]
        return list(response.registers[:count])

    def write_coil(self, address: int, on: bool) -> None:
        client = self._connected()
        self._call(
            f"write coil {address}", client.write_coil, address, on, device_id=self.device_id
        )

    def write_registers(self, address: int, values: list[int]) -> None:
        client = self._connected()
        self._call(
            f"write holding registers {address}",
            client.write_registers,
            address,
            values,
            device_id=self.device_id,
        )

    def _connected(self) -> Any:
        if self._client is None:
            raise SignalLinkError(f"not connected to {self.host}:{self.port}")
        return self._client

    def _call(self, what: str, method: Any, *args: Any, **kwargs: Any) -> Any:
        from pymodbus.exceptions import ModbusException

        try:
            response = method(*args, **kwargs)
        except ModbusException as exc:
            self.close()
            raise SignalLinkError(f"{what} on {self.host}:{self.port} failed: {exc}") from exc
        if response.isError():
            raise SignalLinkError(f"{what} on {self.host}:{self.port} refused: {response}")
        return response
