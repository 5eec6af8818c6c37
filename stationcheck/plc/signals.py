"""Station signals as records, their register encoding, and inputs turned into observations.

Scaled integers on the wire: torque in 0.01 N*m (unsigned 16 bit, 0-655.35 N*m), angle in
0.1 degree (signed 16 bit, -3276.8 to 3276.7 degrees), serial as ASCII two characters per
register, high byte first, NUL-padded.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

from stationcheck.core.alarms import ALARMS
from stationcheck.core.observations import (
    Observation,
    OperatorAck,
    PositionRef,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.core.outputs import Output
from stationcheck.core.plan import FastenStep, StationPlan
from stationcheck.plc.address_map import SERIAL_REGISTERS

logger = logging.getLogger(__name__)

UNIT_STATUS_CODES: dict[str, int] = {"idle": 0, "running": 1, "ok": 2, "nok": 3, "aborted": 4}
TORQUE_SCALE_NM = 0.01
ANGLE_SCALE_DEG = 0.1
WORD = 0xFFFF


@dataclass(frozen=True)
class OutputSignals:
    """What the station tells the PLC after a loop cycle."""

    tool_enable: bool = False
    heartbeat: int = 0
    step_number: int = 0
    position_number: int = 0
    unit_status: int = 0
    alarm_code: int = 0
    rework_mask: int = 0
    unit_ack: int = 0
    result_ack: int = 0

    def __post_init__(self) -> None:
        if not isinstance(self.tool_enable, bool):
            raise TypeError(f"OutputSignals.tool_enable must be bool, got {self.tool_enable!r}")
        for name in ("heartbeat", "step_number", "position_number", "unit_status", "alarm_code",
                     "rework_mask", "unit_ack", "result_ack"):
            value = getattr(self, name)
            if not isinstance(value, int) or not 0 <= value <= WORD:
                raise ValueError(f"OutputSignals.{name} must be 0..65535, got {value!r}")

    def inhibited(self) -> OutputSignals:
        from dataclasses import replace

        return replace(self, tool_enable=False)

    def words(self) -> dict[str, list[int]]:
        """Register (or bit) values per output signal, as written to the PLC."""
        return {
            "tool_enable": [1 if self.tool_enable else 0],
            "heartbeat": [self.heartbeat],
            "step_number": [self.step_number],
            "position_number": [self.position_number],
            "unit_status": [self.unit_status],
            "alarm_code": [self.alarm_code],
            "rework_mask": [self.rework_mask],
            "unit_ack": [self.unit_ack],
            "result_ack": [self.result_ack],
        }


@dataclass(frozen=True)
class InputSignals:
    """What the PLC and tightening controller present, decoded from their registers."""

    tool_running: bool = False
    operator_ack: bool = False
    reset: bool = False
    unit_sequence: int = 0
    rework: bool = False
    serial: str = ""
    result_sequence: int = 0
    result_ok: bool = False
    torque_nm: float = 0.0
    angle_deg: float = 0.0

    @classmethod
    def from_words(cls, words: dict[str, list[int]]) -> InputSignals:
        return cls(
            tool_running=bool(words["tool_running"][0]),
            operator_ack=bool(words["operator_ack"][0]),
            reset=bool(words["reset"][0]),
            unit_sequence=words["unit_sequence"][0],
            rework=bool(words["unit_flags"][0] & 1),
            serial=decode_ascii(words["serial"]),
            result_sequence=words["result_sequence"][0],
            result_ok=words["result_ok"][0] == 1,
            torque_nm=round(words["torque"][0] * TORQUE_SCALE_NM, 2),
            angle_deg=round(to_signed(words["angle"][0]) * ANGLE_SCALE_DEG, 1),
        )

    def words(self) -> dict[str, list[int]]:
        """The register values a PLC presents for these inputs (the simulator writes them)."""
        return {
            "tool_running": [int(self.tool_running)],
            "operator_ack": [int(self.operator_ack)],
            "reset": [int(self.reset)],
            "unit_sequence": [self.unit_sequence & WORD],
            "unit_flags": [int(self.rework)],
            "serial": encode_ascii(self.serial, SERIAL_REGISTERS),
            "result_sequence": [self.result_sequence & WORD],
            "result_ok": [int(self.result_ok)],
            "torque": [scale_unsigned(self.torque_nm, TORQUE_SCALE_NM)],
            "angle": [scale_signed(self.angle_deg, ANGLE_SCALE_DEG)],
        }


def encode_ascii(text: str, registers: int) -> list[int]:
    raw = text.encode("ascii")
    if len(raw) > 2 * registers:
        raise ValueError(f"serial {text!r} is longer than {2 * registers} characters")
    raw = raw.ljust(2 * registers, b"\0")
    return [(raw[i] << 8) | raw[i + 1] for i in range(0, len(raw), 2)]


def decode_ascii(words: list[int]) -> str:
    raw = b"".join(((w >> 8) & 0xFF).to_bytes(1, "big") + (w & 0xFF).to_bytes(1, "big")
                   for w in words)
    return raw.split(b"\0", 1)[0].decode("ascii", errors="replace").strip()


def to_signed(word: int) -> int:
    return word - 0x10000 if word & 0x8000 else word


def scale_unsigned(value: float, scale: float) -> int:
    return max(0, min(WORD, round(value / scale)))


def scale_signed(value: float, scale: float) -> int:
    return max(-0x8000, min(0x7FFF, round(value / scale))) & WORD


def fastener_positions(plan: StationPlan) -> tuple[PositionRef, ...]:
    """Every fastener position of the station in config order (the rework mask's bit order)."""
    return tuple(PositionRef(step.id, zone) for step in plan.steps
                 if isinstance(step, FastenStep) for zone in step.zones)


class OutputEncoder:
    """Turns the sequencer's :class:`Output` into :class:`OutputSignals`."""

    def __init__(self, plan: StationPlan) -> None:
        positions = fastener_positions(plan)
        if len(positions) > 16:
            logger.warning("rework_mask shows the first 16 of %d fastener positions",
                           len(positions))
        self.bit_of = {ref: i for i, ref in enumerate(positions[:16])}

    def encode(self, output: Output, *, heartbeat: int, unit_ack: int, result_ack: int,
               extra_alarms: tuple[str, ...] = (), force_inhibit: bool = False) -> OutputSignals:
        mask = 0
        for ref in output.failed_positions:
            if ref in self.bit_of:
                mask |= 1 << self.bit_of[ref]
        return OutputSignals(
            tool_enable=output.tool_enabled and not force_inhibit,
            heartbeat=heartbeat & WORD,
            step_number=min(output.step_number, WORD),
            position_number=min(output.position_number, WORD),
            unit_status=UNIT_STATUS_CODES[output.unit_status],
            alarm_code=alarm_number(output.alarms + extra_alarms),
            rework_mask=mask,
            unit_ack=unit_ack & WORD,
            result_ack=result_ack & WORD,
        )


def alarm_number(codes: tuple[str, ...]) -> int:
    numbers = [ALARMS[code].number for code in codes if code in ALARMS]
    return min(numbers) if numbers else 0


class InputDecoder:
    """Turns successive :class:`InputSignals` into observations.

    Sequence counters start new units and results when they change. The first reading sets the
    baseline: a unit already presented (sequence not 0, serial set) is started, a result left
    in the PLC from before is not taken. Bits act on their edges (tool_running both ways,
    acknowledge and reset on 0 -> 1).
    """

    def __init__(self) -> None:
        self.last: InputSignals | None = None
        self.unit_ack = 0
        self.result_ack = 0

    def decode(self, inputs: InputSignals, t_s: float) -> list[Observation]:
        last = self.last
        self.last = inputs
        found: list[Observation] = []
        if last is None:
            self.unit_ack = inputs.unit_sequence
            self.result_ack = inputs.result_sequence
            if inputs.unit_sequence != 0 and inputs.serial:
                found.append(UnitStarted(t_s=t_s, serial=inputs.serial, rework=inputs.rework))
            if inputs.tool_running:
                found.append(ToolRunning(t_s=t_s, on=True))
            return found
        if inputs.reset and not last.reset:
            found.append(Reset(t_s=t_s, reason="PLC reset input"))
        if inputs.unit_sequence != self.unit_ack:
            if inputs.serial:
                self.unit_ack = inputs.unit_sequence
                found.append(UnitStarted(t_s=t_s, serial=inputs.serial, rework=inputs.rework))
            elif last.unit_sequence != inputs.unit_sequence:
                logger.warning("unit_sequence changed to %d without a serial; waiting for it",
                               inputs.unit_sequence)
        if inputs.tool_running != last.tool_running:
            found.append(ToolRunning(t_s=t_s, on=inputs.tool_running))
        if inputs.result_sequence != self.result_ack:
            self.result_ack = inputs.result_sequence
            found.append(TighteningResult(t_s=t_s, ok=inputs.result_ok,
                                          torque_nm=inputs.torque_nm,
                                          angle_deg=inputs.angle_deg,
                                          sequence=inputs.result_sequence))
        if inputs.operator_ack and not last.operator_ack:
            found.append(OperatorAck(t_s=t_s))
        return found

