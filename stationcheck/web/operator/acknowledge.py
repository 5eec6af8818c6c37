"""Acknowledge presses from the screen, on their way to the sequencer.

A web request thread posts a press; the frame loop's thread takes it at its next frame and
applies an ``OperatorAck`` only if the step the operator saw is still the one waiting for an
acknowledge (a press that arrives after the step moved on is dropped, so a late press can
never acknowledge something else). Posting never blocks the loop: a lock held for a list swap.
"""

from __future__ import annotations

import logging
import threading
from dataclasses import dataclass

from stationcheck.core.observations import OperatorAck
from stationcheck.pipeline.decision_core import DecisionCore

logger = logging.getLogger(__name__)

MAX_PENDING = 4


@dataclass(frozen=True)
class AckPress:
    """What the operator saw when pressing: the unit and the step that asked for it."""

    serial: str
    step: str

    def __post_init__(self) -> None:
        for name in ("serial", "step"):
            value = getattr(self, name)
            if not isinstance(value, str) or not value:
                raise ValueError(f"AckPress.{name} must be a non-empty string, got {value!r}")


class AckInbox:
    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._pending: list[AckPress] = []
        self.applied = 0
        self.dropped = 0

    def post(self, press: AckPress) -> None:
        with self._lock:
            self._pending = (self._pending + [press])[-MAX_PENDING:]

    def take(self) -> list[AckPress]:
        with self._lock:
            taken, self._pending = self._pending, []
        return taken

    def apply_pending(self, decisions: DecisionCore, t_s: float) -> int:
        """On the loop's thread: each press whose step still waits becomes an OperatorAck;
        returns how many did."""
        applied = 0
        for press in self.take():
            out = decisions.last_output
            waiting = (
                out is not None
                and out.guidance.kind == "acknowledge"
                and out.serial == press.serial
                and out.step_id == press.step
            )
            if not waiting:
                self.dropped += 1
                logger.info(
                    "acknowledge for %s/%s dropped: the step moved on", press.serial, press.step
                )
                continue
            decisions.apply(OperatorAck(t_s=t_s))
            self.applied += 1
            applied += 1
            logger.info("operator acknowledged %s/%s on the screen", press.serial, press.step)
        return applied
