"""PLC inputs turned into observations, under the link-session rule.

Handshakes: the PLC writes a unit's serial and flags, then adds 1 (wrapping 65535 -> 0) to
``unit_sequence``; it writes a result, then adds 1 to ``result_sequence``. The station echoes
what it took in ``unit_ack`` / ``result_ack``.

Session rule: a counter (``unit_sequence``, ``result_sequence`` or ``plc_liveness``) that goes
backwards, or to 0 from anything but 65535, means the PLC restarted. That starts a new session:
a ``plc_session_restart`` event (alarm 30), and the echoes re-synchronise to the counters as they
are now, as at the very first reading. A result counter that restarted is never a result; a unit
counter that restarted with a valid serial presented (not 0) starts that unit; counted up from
there, every later change is a new unit or result. Nothing is ever ignored while acknowledged.

A serial must be printable ASCII and match the configured pattern (default: one or more
printable ASCII characters); a unit with any other serial is refused: it is acknowledged (the PLC
sees it was read) and a ``serial_refused`` event (alarm 31) says why. An empty serial is waited
for.
"""

from __future__ import annotations

import logging
import re
from dataclasses import dataclass

from stationcheck.core.observations import (
    LinkEvent,
    Observation,
    OperatorAck,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.plc.signals import WORD, InputSignals

logger = logging.getLogger(__name__)

DEFAULT_SERIAL_PATTERN = r"[\x20-\x7e]+"
COUNTERS = ("unit_sequence", "result_sequence", "plc_liveness")


def restarted(before: int, after: int) -> bool:
    """A wrapping counter that went backwards or to 0 (65535 -> 0 is its ordinary step)."""
    if after == before:
        return False
    if after == 0:
        return before != WORD
    return ((after - before) & WORD) >= 0x8000


@dataclass(frozen=True)
class SessionSettings:
    serial_pattern: str = DEFAULT_SERIAL_PATTERN

    def __post_init__(self) -> None:
        try:
            re.compile(self.serial_pattern)
        except re.error as exc:
            raise ValueError(f"serial_pattern is not a regular expression: {exc}") from exc


class InputDecoder:
    """Turns successive :class:`InputSignals` into observations (bits act on their edges:
    tool_running both ways, acknowledge and reset on 0 -> 1)."""

    def __init__(self, settings: SessionSettings | None = None) -> None:
        self.settings = settings or SessionSettings()
        self._serial_re = re.compile(self.settings.serial_pattern)
        self.last: InputSignals | None = None
        self.unit_ack = 0
        self.result_ack = 0
        self.sessions = 0  # link sessions begun (the first reading begins the first)
        self._result_data_changed = False

    def decode(self, inputs: InputSignals, t_s: float) -> list[Observation]:
        last = self.last
        self.last = inputs
        found: list[Observation] = []
        if last is None or self._restart(last, inputs, t_s, found):
            self._begin_session(inputs, t_s, found, last)
            return found
        if inputs.reset and not last.reset:
            found.append(Reset(t_s=t_s, reason="PLC reset input"))
        if inputs.unit_sequence != self.unit_ack:
            self._unit(inputs, t_s, found, waiting=last.unit_sequence == inputs.unit_sequence)
        if inputs.tool_running != last.tool_running:
            found.append(ToolRunning(t_s=t_s, on=inputs.tool_running))
        if inputs.result_sequence != self.result_ack:
            self.result_ack = inputs.result_sequence
            self._result_data_changed = False
            found.append(
                TighteningResult(
                    t_s=t_s,
                    ok=inputs.result_ok,
                    torque_nm=inputs.torque_nm,
                    angle_deg=inputs.angle_deg,
                    sequence=inputs.result_sequence,
                )
            )
        else:
            self._result_without_sequence(last, inputs, t_s, found)
        if inputs.operator_ack and not last.operator_ack:
            found.append(OperatorAck(t_s=t_s))
        return found

    def _restart(
        self, last: InputSignals, inputs: InputSignals, t_s: float, found: list[Observation]
    ) -> bool:
        moved = [
            f"{name} {getattr(last, name)} -> {getattr(inputs, name)}"
            for name in COUNTERS
            if restarted(getattr(last, name), getattr(inputs, name))
        ]
        if not moved:
            return False
        detail = "PLC restart seen: " + ", ".join(moved) + "; echoes re-synchronised"
        logger.warning("%s", detail)
        found.append(LinkEvent(t_s=t_s, code="plc_session_restart", detail=detail))
        return True

    def _begin_session(
        self, inputs: InputSignals, t_s: float, found: list[Observation], last: InputSignals | None
    ) -> None:
        """Echoes follow the counters as they are; a result left in the PLC is not taken; a
        unit presented (counter not 0) that differs from the one taken last is started."""
        self.sessions += 1
        self.result_ack = inputs.result_sequence
        self._result_data_changed = False
        previous_unit = self.unit_ack if last is not None else None
        self.unit_ack = inputs.unit_sequence
        if inputs.unit_sequence != 0 and inputs.unit_sequence != previous_unit:
            self._unit(inputs, t_s, found, waiting=False)
        if inputs.tool_running and (last is None or not last.tool_running):
            found.append(ToolRunning(t_s=t_s, on=True))
        elif last is not None and last.tool_running and not inputs.tool_running:
            found.append(ToolRunning(t_s=t_s, on=False))

    def _unit(
        self, inputs: InputSignals, t_s: float, found: list[Observation], waiting: bool
    ) -> None:
        problem = self.serial_problem(inputs)
        if problem == "empty":
            if not waiting:
                logger.warning(
                    "unit_sequence changed to %d without a serial; waiting for it",
                    inputs.unit_sequence,
                )
            return
        self.unit_ack = inputs.unit_sequence
        if problem:
            detail = f"unit {inputs.unit_sequence} refused: serial {inputs.serial!r}: {problem}"
            logger.warning("%s", detail)
            found.append(LinkEvent(t_s=t_s, code="serial_refused", detail=detail))
            return
        found.append(UnitStarted(t_s=t_s, serial=inputs.serial, rework=inputs.rework))

    def serial_problem(self, inputs: InputSignals) -> str:
        """ "" for a valid serial, "empty" when there is none yet, else the reason."""
        if inputs.serial_problem:
            return inputs.serial_problem
        if not inputs.serial:
            return "empty"
        if self._serial_re.fullmatch(inputs.serial) is None:
            return f"does not match the pattern {self.settings.serial_pattern!r}"
        return ""

    def _result_without_sequence(
        self, last: InputSignals, inputs: InputSignals, t_s: float, found: list[Observation]
    ) -> None:
        """Result data that changed and still has no new sequence one reading later (the PLC
        writes data first and the sequence last, so one reading may fall in between)."""
        changed = (last.result_ok, last.torque_nm, last.angle_deg) != (
            inputs.result_ok,
            inputs.torque_nm,
            inputs.angle_deg,
        )
        if self._result_data_changed and not changed:
            self._result_data_changed = False
            detail = (
                f"result data changed but result_sequence stayed {inputs.result_sequence}: "
                "not taken as a result"
            )
            logger.warning("%s", detail)
            found.append(LinkEvent(t_s=t_s, code="result_without_sequence", detail=detail))
        elif changed:
            self._result_data_changed = True
