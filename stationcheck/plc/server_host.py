"""A Modbus TCP server on its own thread and event loop, with a plain register image.

The station simulator (and the tests of the client link) run the real pymodbus server here.
The datastore is pymodbus' ``SimDevice`` with four separate blocks (coils, discrete inputs,
holding registers, input registers), each ``size`` long from PDU address 0; code on other
threads reads and writes it through :meth:`ServerHost.get` and :meth:`ServerHost.set`, which run
on the server's loop, so no request ever sees half an update.
"""

from __future__ import annotations

import asyncio
import logging
import threading
from collections.abc import Callable, Coroutine, Sequence
from typing import Any, Literal, Self, TypeVar

from stationcheck.errors import SignalLinkError

logger = logging.getLogger(__name__)

Table = Literal["coil", "discrete_input", "holding_register", "input_register"]
TABLES: tuple[Table, ...] = ("coil", "discrete_input", "holding_register", "input_register")
# Function codes whose datastore block each table is (Modbus Application Protocol V1.1b3, 6.1-6.4).
READ_FUNCTION: dict[Table, int] = {
    "coil": 1,
    "discrete_input": 2,
    "holding_register": 3,
    "input_register": 4,
}
PacketTrace = Callable[[bool, bytes], None]
T = TypeVar("T")


class ServerHost:
    """Starts a pymodbus ``ModbusTcpServer`` on ``host:port`` in a daemon thread."""

    def __init__(
        self,
        host: str,
        port: int,
        *,
        size: int = 64,
        device_id: int = 1,
        on_packet: PacketTrace | None = None,
        unit_ids: frozenset[int] | None = None,
    ) -> None:
        self.host = host
        self.port = port
        self.size = size
        self.device_id = device_id
        self.unit_ids = unit_ids if unit_ids is not None else frozenset({device_id})
        self.on_packet = on_packet
        self._loop: asyncio.AbstractEventLoop | None = None
        self._server: Any = None
        self._thread: threading.Thread | None = None
        self._ready = threading.Event()
        self._error: BaseException | None = None

    @property
    def running(self) -> bool:
        return self._ready.is_set() and self._error is None and self._server is not None

    def start(self, timeout_s: float = 5.0) -> Self:
        self._thread = threading.Thread(target=self._run, name="modbus-server", daemon=True)
        self._thread.start()
        if not self._ready.wait(timeout_s):
            raise SignalLinkError(f"the Modbus server on {self.host}:{self.port} did not start")
        if self._error is not None:
            raise SignalLinkError(
                f"the Modbus server on {self.host}:{self.port} did not start: {self._error}"
            ) from self._error
        return self

    def stop(self, timeout_s: float = 5.0) -> None:
        loop, server = self._loop, self._server
        if loop is None or server is None or loop.is_closed():
            return
        try:
            asyncio.run_coroutine_threadsafe(server.shutdown(), loop).result(timeout_s)
        except Exception:
            logger.exception("the Modbus server did not shut down cleanly")
        if self._thread is not None:
            self._thread.join(timeout_s)

    def __enter__(self) -> Self:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    def get(self, table: Table, address: int, count: int = 1) -> list[int]:
        """Values as the server holds them (bits as 0/1)."""
        values = self._call(
            self._context().async_getValues(self.device_id, READ_FUNCTION[table], address, count)
        )
        if not isinstance(values, list):
            raise SignalLinkError(f"server image has no {table} {address}..{address + count - 1}")
        return [int(v) for v in values]

    def set(self, table: Table, address: int, values: Sequence[int]) -> None:
        """Writes the server's own image (e.g. inputs a PLC would present)."""
        data: list[Any] = (
            [bool(v) for v in values]
            if table in ("coil", "discrete_input")
            else [int(v) & 0xFFFF for v in values]
        )
        error = self._call(
            self._context().async_setValues(self.device_id, READ_FUNCTION[table], address, data)
        )
        if error:
            raise SignalLinkError(f"server image refused {table} {address}: {error}")

    def call_soon(self, coroutine: Coroutine[Any, Any, T], timeout_s: float = 5.0) -> T:
        return self._call(coroutine, timeout_s)

    def _context(self) -> Any:
        if self._server is None:
            raise SignalLinkError("the Modbus server is not running")
        return self._server.context

    def _call(self, coroutine: Coroutine[Any, Any, T], timeout_s: float = 5.0) -> T:
        if self._loop is None or self._loop.is_closed():
            coroutine.close()
            raise SignalLinkError("the Modbus server is not running")
        return asyncio.run_coroutine_threadsafe(coroutine, self._loop).result(timeout_s)

    def _run(self) -> None:
        try:
            asyncio.run(self._serve())
        except BaseException as exc:  # noqa: BLE001 - reported to start()
            self._error = exc
            self._ready.set()

    async def _serve(self) -> None:
        from pymodbus.server import ModbusTcpServer

        self._loop = asyncio.get_running_loop()
        self._server = ModbusTcpServer(
            _device(self.size, self.device_id),
            address=(self.host, self.port),
            trace_packet=self._trace if self.on_packet is not None else None,
        )
        self._server.context = _UnitIds(self._server.context, self.unit_ids, self.device_id)
        await self._server.serve_forever(background=True)  # raises if it cannot listen
        self._ready.set()
        await self._server.serving

    def _trace(self, sending: bool, packet: bytes) -> bytes:
        assert self.on_packet is not None
        self.on_packet(sending, packet)
        return packet


def _device(size: int, device_id: int) -> Any:
    from pymodbus.simulator import DataType, SimData, SimDevice

    bits = [SimData(0, count=size, values=False, datatype=DataType.BITS)]
    coils = [SimData(0, count=size, values=False, datatype=DataType.BITS)]
    holding = [SimData(0, count=size, values=0, datatype=DataType.UINT16)]
    inputs = [SimData(0, count=size, values=0, datatype=DataType.UINT16)]
    return SimDevice(device_id, simdata=(coils, bits, holding, inputs))


class _UnitIds:
    """The datastore answered under each of ``unit_ids``; other ids are unknown devices
    (pymodbus answers them with exception 0x0B)."""

    def __init__(self, core: Any, unit_ids: frozenset[int], device_id: int) -> None:
        self.core = core
        self.unit_ids = unit_ids
        self.device_id = device_id

    def _device(self, unit_id: int) -> int:
        from pymodbus.exceptions import NoSuchIdException

        if unit_id not in self.unit_ids:
            raise NoSuchIdException(f"unit id {unit_id} is not served")
        return self.device_id

    def device_ids(self) -> list[int]:
        return [self.device_id]

    async def async_getValues(
        self, unit_id: int, func_code: int, address: int, count: int = 1
    ) -> Any:
        return await self.core.async_getValues(self._device(unit_id), func_code, address, count)

    async def async_setValues(self, unit_id: int, func_code: int, address: int, values: Any) -> Any:
        return await self.core.async_setValues(self._device(unit_id), func_code, address, values)
