"""Station signals as records and their register encoding (the decoder of inputs into
observations is :mod:`stationcheck.plc.link_session`).

Scaled integers on the wire: torque in 0.01 N*m (unsigned 16 bit, 0-655.35 N*m), angle in
0.1 degree (signed 16 bit, -3276.8 to 3276.7 degrees), serial as ASCII two characters per
register, high byte first, NUL-padded.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

from stationcheck.core.alarms import ALARMS
from stationcheck.core.observations import PositionRef
from stationcheck.core.outputs import Output
from stationcheck.core.plan import FastenStep, StationPlan
from stationcheck.plc.address_map import SERIAL_REGISTERS

logger = logging.getLogger(__name__)

UNIT_STATUS_CODES: dict[str, int] = {"idle": 0, "running": 1, "ok": 2, "nok": 3, "aborted": 4}
# result_status register: the core's verdict on the last result (see core.handlers)
RESULT_STATUS_CODES: dict[str, int] = {
    "none": 0,
    "accepted": 1,
    "rejected_not_enabled": 2,
    "rejected_not_credited": 3,
    "rejected_duplicate": 4,
}
# unit_reason register: how a unit that is not OK ended (the core's ``ended_by``)
UNIT_REASON_CODES: dict[str, int] = {
    "completed": 1,
    "stopped_on_failure": 2,
    "check_failed": 3,
    "new_unit": 4,
    "abort": 5,
}
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
    result_status: int = 0
    event_code: int = 0
    event_count: int = 0
    unit_reason: int = 0

    def __post_init__(self) -> None:
        if not isinstance(self.tool_enable, bool):
            raise TypeError(f"OutputSignals.tool_enable must be bool, got {self.tool_enable!r}")
        for name in REGISTER_OUTPUTS:
            value = getattr(self, name)
            if not isinstance(value, int) or not 0 <= value <= WORD:
                raise ValueError(f"OutputSignals.{name} must be 0..65535, got {value!r}")

    def inhibited(self) -> OutputSignals:
        from dataclasses import replace

        return replace(self, tool_enable=False)

    def words(self) -> dict[str, list[int]]:
        """Register (or bit) values per output signal, as written to the PLC."""
        words = {"tool_enable": [1 if self.tool_enable else 0]}
        words.update({name: [getattr(self, name)] for name in REGISTER_OUTPUTS})
        return words


REGISTER_OUTPUTS: tuple[str, ...] = (
    "heartbeat",
    "step_number",
    "position_number",
    "unit_status",
    "alarm_code",
    "rework_mask",
    "unit_ack",
    "result_ack",
    "result_status",
    "event_code",
    "event_count",
    "unit_reason",
)


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
    plc_liveness: int = 0
    serial_problem: str = ""  # why the serial registers hold no valid text ("" = none)

    @classmethod
    def from_words(cls, words: dict[str, list[int]]) -> InputSignals:
        return cls(
            tool_running=bool(words["tool_running"][0]),
            operator_ack=bool(words["operator_ack"][0]),
            reset=bool(words["reset"][0]),
            unit_sequence=words["unit_sequence"][0],
            rework=bool(words["unit_flags"][0] & 1),
            serial=decode_ascii(words["serial"]),
            serial_problem=serial_problem(words["serial"]),
            result_sequence=words["result_sequence"][0],
            result_ok=words["result_ok"][0] == 1,
            torque_nm=round(words["torque"][0] * TORQUE_SCALE_NM, 2),
            angle_deg=round(to_signed(words["angle"][0]) * ANGLE_SCALE_DEG, 1),
            plc_liveness=words["plc_liveness"][0],
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
            "plc_liveness": [self.plc_liveness & WORD],
        }


def encode_ascii(text: str, registers: int) -> list[int]:
    raw = text.encode("ascii")
    if len(raw) > 2 * registers:
        raise ValueError(f"serial {text!r} is longer than {2 * registers} characters")
    raw = raw.ljust(2 * registers, b"\0")
    return [(raw[i] << 8) | raw[i + 1] for i in range(0, len(raw), 2)]


def _raw(words: list[int]) -> bytes:
    raw = b"".join(
        ((w >> 8) & 0xFF).to_bytes(1, "big") + (w & 0xFF).to_bytes(1, "big") for w in words
    )
    return raw.split(b"\0", 1)[0]


def decode_ascii(words: list[int]) -> str:
    """The serial as text; bytes that are not printable ASCII show as ``\\xNN`` (so two
    different garbage serials never read the same), see :func:`serial_problem`."""
    return _raw(words).decode("ascii", errors="backslashreplace").strip()


def serial_problem(words: list[int]) -> str:
    """Why the serial registers hold no valid serial, or "" when they hold printable ASCII."""
    if words and all(w == WORD for w in words):
        return "all serial registers are 0xFFFF"
    for byte in _raw(words):
        if byte >= 0x80:
            return f"non-ASCII byte 0x{byte:02X}"
        if byte < 0x20 or byte == 0x7F:
            return f"control character 0x{byte:02X}"
    return ""


def to_signed(word: int) -> int:
    return word - 0x10000 if word & 0x8000 else word


def scale_unsigned(value: float, scale: float) -> int:
    return max(0, min(WORD, round(value / scale)))


def scale_signed(value: float, scale: float) -> int:
    return max(-0x8000, min(0x7FFF, round(value / scale))) & WORD


def fastener_positions(plan: StationPlan) -> tuple[PositionRef, ...]:
    """Every fastener position of the station in config order (the rework mask's bit order)."""
    return tuple(
        PositionRef(step.id, zone)
        for step in plan.steps
        if isinstance(step, FastenStep)
        for zone in step.zones
    )


class OutputEncoder:
    """Turns the sequencer's :class:`Output` into :class:`OutputSignals`."""

    def __init__(self, plan: StationPlan) -> None:
        positions = fastener_positions(plan)
        if len(positions) > 16:
            logger.warning(
                "rework_mask shows the first 16 of %d fastener positions", len(positions)
            )
        self.bit_of = {ref: i for i, ref in enumerate(positions[:16])}

    def encode(
        self,
        output: Output,
        *,
        heartbeat: int,
        unit_ack: int,
        result_ack: int,
        extra_alarms: tuple[str, ...] = (),
        force_inhibit: bool = False,
    ) -> OutputSignals:
        """``result_status`` is decided with the result, one cycle before ``result_ack`` echoes
        it, so it is valid whenever ``result_ack`` equals the PLC's ``result_sequence``."""
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
            result_status=RESULT_STATUS_CODES.get(output.result_status, 0),
            event_code=ALARMS[output.last_event].number if output.last_event in ALARMS else 0,
            event_count=output.event_count & WORD,
            unit_reason=unit_reason(output),
        )


def alarm_number(codes: tuple[str, ...]) -> int:
    numbers = [ALARMS[code].number for code in codes if code in ALARMS]
    return min(numbers) if numbers else 0


def unit_reason(output: Output) -> int:
    """0 while a unit is open or ended OK; else the code of how it ended."""
    if output.unit_status not in ("nok", "aborted") or output.ended_by is None:
        return 0
    return UNIT_REASON_CODES.get(output.ended_by, UNIT_REASON_CODES["abort"])
