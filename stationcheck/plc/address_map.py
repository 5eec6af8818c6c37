"""Where each station signal lives in the PLC's Modbus tables (PDU addresses from 0).

The default map keeps every signal the station writes in coil 0 and holding registers 0-11, and
every signal it reads in discrete inputs 0-2 and holding registers 16-32, so a PLC programmer
maps two small blocks. With the station as Modbus server (the PLC polls it) the three input
bits are coils 16-18 instead, since a Modbus client cannot write discrete inputs. A config's ``plc.address_map`` moves single signals; the result is
checked for overlaps and for the register count a signal needs.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Literal

from stationcheck.errors import ConfigError
from stationcheck.plc.server_host import Table

Direction = Literal["out", "in"]
SERIAL_REGISTERS = 10  # 20 ASCII characters, two per register, high byte first


@dataclass(frozen=True)
class SignalSpec:
    name: str
    direction: Direction
    table: Table
    address: int
    count: int
    meaning: str


DEFAULT_SIGNALS: tuple[SignalSpec, ...] = (
    SignalSpec(
        "tool_enable",
        "out",
        "coil",
        0,
        1,
        "1 = tool may run (energise-to-enable; 0 on any fault or link loss)",
    ),
    SignalSpec(
        "heartbeat",
        "out",
        "holding_register",
        0,
        1,
        "counts up by 1 per healthy loop cycle, wraps 65535 -> 0; stops when unhealthy",
    ),
    SignalSpec(
        "step_number",
        "out",
        "holding_register",
        1,
        1,
        "current step, 1-based in the unit's pass; 0 = no unit",
    ),
    SignalSpec(
        "position_number",
        "out",
        "holding_register",
        2,
        1,
        "target fastener, 1-based in the step's order; 0 = not fastening",
    ),
    SignalSpec(
        "unit_status", "out", "holding_register", 3, 1, "0 idle, 1 running, 2 OK, 3 NOK, 4 aborted"
    ),
    SignalSpec(
        "alarm_code",
        "out",
        "holding_register",
        4,
        1,
        "lowest active alarm number (stationcheck alarm list); 0 = none",
    ),
    SignalSpec(
        "rework_mask",
        "out",
        "holding_register",
        5,
        1,
        "bit n set = fastener position n+1 of the station (config order) failed",
    ),
    SignalSpec(
        "unit_ack", "out", "holding_register", 6, 1, "echo of the last unit_sequence taken in"
    ),
    SignalSpec(
        "result_ack", "out", "holding_register", 7, 1, "echo of the last result_sequence taken in"
    ),
    SignalSpec(
        "result_status",
        "out",
        "holding_register",
        8,
        1,
        "verdict on the result result_ack echoes: 0 none yet, 1 accepted, 2 rejected "
        "(no position enabled), 3 rejected (run did not start enabled at the target), "
        "4 rejected (same sequence again)",
    ),
    SignalSpec(
        "event_code",
        "out",
        "holding_register",
        9,
        1,
        "number of the latest one-off alarm or warning (latched; 0 = none since start)",
    ),
    SignalSpec(
        "event_count",
        "out",
        "holding_register",
        10,
        1,
        "adds 1 (wrapping) per one-off alarm or warning: a change means a new event_code",
    ),
    SignalSpec(
        "unit_reason",
        "out",
        "holding_register",
        11,
        1,
        "why the last unit is NOK or aborted: 0 none, 1 positions failed, 2 stopped on a "
        "failed position, 3 check failed, 4 a new unit came, 5 aborted or reset",
    ),
    SignalSpec("tool_running", "in", "discrete_input", 0, 1, "1 while the tool runs"),
    SignalSpec(
        "operator_ack",
        "in",
        "discrete_input",
        1,
        1,
        "operator acknowledge; acts on the 0 -> 1 edge",
    ),
    SignalSpec("reset", "in", "discrete_input", 2, 1, "station reset; acts on the 0 -> 1 edge"),
    SignalSpec(
        "unit_sequence",
        "in",
        "holding_register",
        16,
        1,
        "PLC adds 1 (wrapping) after writing serial and unit_flags: starts the unit",
    ),
    SignalSpec("unit_flags", "in", "holding_register", 17, 1, "bit 0 = rework pass"),
    SignalSpec(
        "serial",
        "in",
        "holding_register",
        18,
        SERIAL_REGISTERS,
        "unit serial, ASCII, 2 characters per register, high byte first, NUL-padded",
    ),
    SignalSpec(
        "result_sequence",
        "in",
        "holding_register",
        28,
        1,
        "PLC adds 1 (wrapping) after writing result_ok, torque and angle: a new result",
    ),
    SignalSpec("result_ok", "in", "holding_register", 29, 1, "1 = OK, 0 = NOK"),
    SignalSpec("torque", "in", "holding_register", 30, 1, "final torque, unsigned, 0.01 N*m"),
    SignalSpec(
        "angle",
        "in",
        "holding_register",
        31,
        1,
        "final angle, signed 16-bit two's complement, 0.1 degree",
    ),
    SignalSpec(
        "plc_liveness",
        "in",
        "holding_register",
        32,
        1,
        "PLC adds 1 (wrapping) every scan or poll; the link is down when it stops "
        "changing for plc.liveness_timeout_ms, and a restart (back to 0) is a new session",
    ),
)
SIGNAL_NAMES: tuple[str, ...] = tuple(spec.name for spec in DEFAULT_SIGNALS)
BIT_TABLES: tuple[Table, ...] = ("coil", "discrete_input")


@dataclass(frozen=True)
class AddressMap:
    signals: Mapping[str, SignalSpec]

    def __getitem__(self, name: str) -> SignalSpec:
        return self.signals[name]

    def of(self, direction: Direction) -> tuple[SignalSpec, ...]:
        return tuple(s for s in self.signals.values() if s.direction == direction)

    def highest_address(self) -> int:
        return max(s.address + s.count for s in self.signals.values())


# With the station as server the PLC writes the input bits, so they move from discrete inputs
# (read-only over Modbus) to coils 16-18.
SERVER_INPUT_COILS: dict[str, int] = {"tool_running": 16, "operator_ack": 17, "reset": 18}


def default_address_map(server: bool = False) -> AddressMap:
    signals = {spec.name: spec for spec in DEFAULT_SIGNALS}
    if server:
        for name, address in SERVER_INPUT_COILS.items():
            signals[name] = replace(signals[name], table="coil", address=address)
    return AddressMap(signals)


Location = tuple[str, ...]


def address_map_from(overrides: Mapping[str, object], server: bool = False) -> AddressMap:
    """The default map with config entries (``table``, ``address``, ``count``) laid over it.

    Each entry may be the config schema's model or a plain mapping; errors are collected.
    ``server``: the station is the Modbus server, so inputs must be tables the PLC can write.
    """
    amap, problems = address_map_findings(overrides, server)
    if problems:
        raise ConfigError("; ".join(f"{'.'.join(path)}: {message}" for path, message in problems))
    return amap


def address_map_findings(
    overrides: Mapping[str, object], server: bool = False
) -> tuple[AddressMap, list[tuple[Location, str]]]:
    """The map and every problem with its config path: the one check ``check`` and ``run``
    share (unknown signals, wrong tables or counts, overlaps with any signal, moved or not)."""
    base = default_address_map(server).signals
    signals = dict(base)
    problems: list[tuple[Location, str]] = []
    for name, entry in overrides.items():
        path = ("plc", "address_map", name)
        if name not in base:
            problems.append((path, f"unknown signal (known: {', '.join(SIGNAL_NAMES)})"))
            continue
        table = _field(entry, "table")
        address = _field(entry, "address")
        count = _field(entry, "count", base[name].count)
        if "count" not in getattr(entry, "model_fields_set", {"count"}):
            count = base[name].count  # a config entry that leaves count out means the signal's
        default = base[name]
        found = len(problems)
        if count != default.count:
            problems.append((path + ("count",), f"must be {default.count}, got {count}"))
        allowed = _allowed_tables(default, server)
        if table not in allowed:
            problems.append((path + ("table",), f"must be one of {allowed}, got {table}"))
        if not isinstance(address, int) or not 0 <= address <= 65535 - default.count + 1:
            span = f"0..{65536 - default.count} ({default.count} addresses from there)"
            problems.append((path + ("address",), f"must be {span}, got {address}"))
        if len(problems) == found:
            signals[name] = SignalSpec(
                name,
                default.direction,
                table,  # type: ignore[arg-type]
                address,  # type: ignore[arg-type]
                default.count,
                default.meaning,
            )
    problems.extend(_overlaps(signals.values(), set(overrides)))
    return AddressMap(signals), problems


def _allowed_tables(spec: SignalSpec, server: bool = False) -> tuple[Table, ...]:
    bit = spec.table in BIT_TABLES
    if spec.direction == "out" or server:
        return ("coil",) if bit else ("holding_register",)
    return ("discrete_input", "coil") if bit else ("holding_register", "input_register")


def _field(entry: object, name: str, default: object = None) -> object:
    if isinstance(entry, Mapping):
        return entry.get(name, default)
    return getattr(entry, name, default)


def _overlaps(specs: object, moved: set[str]) -> list[tuple[Location, str]]:
    taken: dict[tuple[str, int], str] = {}
    problems: list[tuple[Location, str]] = []
    for spec in specs:  # type: ignore[attr-defined]
        for address in range(spec.address, spec.address + spec.count):
            other = taken.setdefault((spec.table, address), spec.name)
            if other != spec.name:
                name = spec.name if spec.name in moved else other
                message = (
                    f"{spec.table} {address} is taken by both {spec.name} and {other}; "
                    "each signal needs its own addresses"
                )
                problems.append((("plc", "address_map", name, "address"), message))
                break
    return problems


def markdown_table(address_map: AddressMap | None = None) -> str:
    """The map as a Markdown table (for the README and for the PLC programmer)."""
    amap = address_map or default_address_map()
    rows = [
        "| signal | direction | table | PDU address | registers | meaning |",
        "|---|---|---|---|---|---|",
    ]
    for spec in amap.signals.values():
        direction = "station -> PLC" if spec.direction == "out" else "PLC -> station"
        last = spec.address + spec.count - 1
        where = str(spec.address) if spec.count == 1 else f"{spec.address}-{last}"
        rows.append(
            f"| {spec.name} | {direction} | {spec.table} | {where} | {spec.count} | "
            f"{spec.meaning} |"
        )
    return "\n".join(rows)
