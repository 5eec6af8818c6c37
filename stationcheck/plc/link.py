"""The signal link: one edge between the station and its PLC, and the links that are not Modbus.

A :class:`SignalLink` does blocking I/O and is only ever called from the link worker's thread
(:mod:`stationcheck.plc.worker`), never from the frame loop. :class:`TableLink` lays the address
map over four Modbus-style tables, so the Modbus client and the in-memory fake share the
grouping of signals into as few requests as possible: the enable coil alone (FC 05), the output
registers as one FC 16 when they are consecutive, each input table in one read.
"""

from __future__ import annotations

import logging
import threading
import time
from abc import ABC, abstractmethod
from collections import defaultdict
from typing import Protocol

from stationcheck.plc.address_map import AddressMap, SignalSpec, default_address_map
from stationcheck.plc.server_host import TABLES, Table
from stationcheck.plc.signals import InputSignals, OutputSignals

logger = logging.getLogger(__name__)

MAX_READ: dict[Table, int] = {  # quantity limits per request (Modbus spec V1.1b3, 6.1-6.4)
    "coil": 2000,
    "discrete_input": 2000,
    "holding_register": 125,
    "input_register": 125,
}


class SignalLink(Protocol):
    name: str

    def connect(self) -> None: ...

    def write_outputs(self, outputs: OutputSignals, refresh: bool = False) -> None: ...

    def read_inputs(self) -> InputSignals: ...

    def close(self) -> None: ...


class TableLink(ABC):
    """Signals to table requests: coils written when they change, registers in runs of
    consecutive registers when one of them changed (everything on ``refresh``); inputs read one
    span per table."""

    name = "tables"
    has_liveness = True  # the PLC presents plc_liveness
    write_unchanged = False  # a local image (server mode) is rewritten in full every time

    def __init__(self, address_map: AddressMap | None = None) -> None:
        self.address_map = address_map or default_address_map()
        self._read_plan = _read_plan(self.address_map.of("in"))
        self.coil_written_at: float | None = None
        self._written: dict[tuple[str, int], int] = {}

    @abstractmethod
    def read_table(self, table: Table, address: int, count: int) -> list[int]: ...

    @abstractmethod
    def write_coil(self, address: int, on: bool) -> None: ...

    @abstractmethod
    def write_registers(self, address: int, values: list[int]) -> None: ...

    def connect(self) -> None:
        """Nothing to connect by default."""

    def close(self) -> None:
        """Nothing to close by default."""

    def write_outputs(self, outputs: OutputSignals, refresh: bool = False) -> None:
        """The coil (the tool enable) first, then the registers in consecutive runs, each only
        when it changed; ``coil_written_at`` is the perf_counter when the coil was written."""
        words = outputs.words()
        everything = refresh or self.write_unchanged
        registers: dict[int, int] = {}
        for spec in self.address_map.of("out"):
            if spec.table == "coil":
                on = words[spec.name][0]
                if everything or self._written.get(("coil", spec.address)) != on:
                    self._written.pop(("coil", spec.address), None)  # unknown if it fails
                    self.write_coil(spec.address, bool(on))
                    self._written[("coil", spec.address)] = on
                    self.coil_written_at = time.perf_counter()
            else:
                for offset, value in enumerate(words[spec.name]):
                    registers[spec.address + offset] = value
        for start, values in _runs(registers):
            keys = [("holding_register", start + i) for i in range(len(values))]
            if everything or any(self._written.get(k) != v for k, v in zip(keys, values)):
                for key in keys:
                    self._written.pop(key, None)
                self.write_registers(start, values)
                self._written.update(zip(keys, values))

    def read_inputs(self) -> InputSignals:
        words: dict[str, list[int]] = {}
        for table, start, count, specs in self._read_plan:
            values = self.read_table(table, start, count)
            for spec in specs:
                offset = spec.address - start
                words[spec.name] = values[offset : offset + spec.count]
        return InputSignals.from_words(words)


def _read_plan(specs: tuple[SignalSpec, ...]) -> list[tuple[Table, int, int, list[SignalSpec]]]:
    by_table: dict[Table, list[SignalSpec]] = defaultdict(list)
    for spec in specs:
        by_table[spec.table].append(spec)
    plan: list[tuple[Table, int, int, list[SignalSpec]]] = []
    for table, group in by_table.items():
        start = min(s.address for s in group)
        end = max(s.address + s.count for s in group)
        if end - start <= MAX_READ[table]:
            plan.append((table, start, end - start, group))
        else:
            plan.extend((table, s.address, s.count, [s]) for s in group)
    return plan


def _runs(registers: dict[int, int]) -> list[tuple[int, list[int]]]:
    runs: list[tuple[int, list[int]]] = []
    for address in sorted(registers):
        if runs and runs[-1][0] + len(runs[-1][1]) == address and len(runs[-1][1]) < 123:
            runs[-1][1].append(registers[address])
        else:
            runs.append((address, [registers[address]]))
    return runs


class MemoryLink(TableLink):
    """The in-memory fake: a register image another thread (a test, a simulation) can set."""

    name = "memory"

    def __init__(self, address_map: AddressMap | None = None) -> None:
        super().__init__(address_map)
        self.lock = threading.Lock()
        self.tables: dict[Table, dict[int, int]] = {table: {} for table in TABLES}
        self.fail: Exception | None = None  # raised by every call while set
        self.coil_writes: list[tuple[float, int, bool]] = []  # (perf_counter, address, on)

    def _check(self) -> None:
        if self.fail is not None:
            raise self.fail

    def read_table(self, table: Table, address: int, count: int) -> list[int]:
        with self.lock:
            self._check()
            return [self.tables[table].get(address + i, 0) for i in range(count)]

    def write_coil(self, address: int, on: bool) -> None:
        with self.lock:
            self._check()
            self.tables["coil"][address] = int(on)
            self.coil_writes.append((time.perf_counter(), address, on))

    def write_registers(self, address: int, values: list[int]) -> None:
        with self.lock:
            self._check()
            for offset, value in enumerate(values):
                self.tables["holding_register"][address + offset] = value

    def present(self, inputs: InputSignals) -> None:
        """Sets the input signals as a PLC would present them."""
        words = inputs.words()
        with self.lock:
            for spec in self.address_map.of("in"):
                for offset, value in enumerate(words[spec.name]):
                    self.tables[spec.table][spec.address + offset] = value

    def value(self, name: str) -> list[int]:
        spec = self.address_map[name]
        with self.lock:
            return [self.tables[spec.table].get(spec.address + i, 0) for i in range(spec.count)]


class ConsoleLink:
    """For dry runs without a PLC: logs every change of the outputs; no inputs ever arrive
    (the heartbeat is left out of the comparison so the log is not flooded)."""

    name = "console"

    def __init__(self) -> None:
        self.last: OutputSignals | None = None
        self.changes = 0

    def connect(self) -> None:
        logger.info("console link: outputs are logged, no PLC is connected")

    def write_outputs(self, outputs: OutputSignals, refresh: bool = False) -> None:
        if self.last is None or _without_heartbeat(outputs) != _without_heartbeat(self.last):
            self.changes += 1
            logger.info("outputs: %s", _describe(outputs))
        self.last = outputs

    def read_inputs(self) -> InputSignals:
        return InputSignals()

    def close(self) -> None:
        logger.info("console link closed")


def _without_heartbeat(outputs: OutputSignals) -> dict[str, list[int]]:
    words = outputs.words()
    words.pop("heartbeat")
    return words


def _describe(outputs: OutputSignals) -> str:
    return " ".join(f"{name}={values[0]}" for name, values in outputs.words().items())
