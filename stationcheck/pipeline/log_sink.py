"""The step log as a pipeline sink: every step's events committed before the next step, the
rework look-up, and the inhibit record written when a run stops on an error."""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from dataclasses import replace

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import Event
from stationcheck.core.observations import PositionRef
from stationcheck.errors import StoreError, first_line, stop_requested
from stationcheck.pipeline.decision_core import DecisionStep
from stationcheck.pipeline.evidence import EvidenceWriter
from stationcheck.store.step_log import StepLog

logger = logging.getLogger(__name__)

STOPPED_ON_ERROR = "stopped_on_error"
STOPPED_ON_REQUEST = "stopped_on_request"  # Ctrl-C, or SIGTERM from a service manager


def rework_positions_from_log(log: StepLog, serial: str) -> tuple[PositionRef, ...]:
    """Failed and unfinished positions of the unit's last closed pass (empty if none)."""
    for stored in reversed(log.events(serial=serial)):
        event = stored.event
        if isinstance(event, ev.UnitEnded):
            return event.failed_positions + event.unfinished_positions
    return ()


class StepLogSink:
    """Appends each step's events as one atomic batch; ``clock`` stamps ``recorded_at_s``;
    ``evidence`` (if given) attaches an image to each tightening result before it is saved.

    ``deferred`` (the live loop) holds a cycle's events until :meth:`flush`, which the loop
    calls once the outputs are on their way to the PLC: one commit per cycle, and the disk's
    sync time never delays the enable signal. Events wait at most one loop cycle.
    """

    def __init__(
        self,
        log: StepLog,
        clock: Callable[[], float] = time.time,
        evidence: EvidenceWriter | None = None,
        *,
        deferred: bool = False,
    ) -> None:
        self.log = log
        self.clock = clock
        self.evidence = evidence
        self.deferred = deferred
        self.events_written = 0
        self._pending: list[Event] = []
        self._last_t_s = 0.0
        self._last_serial: str | None = None
        self._enabled = False

    def on_step(self, step: DecisionStep) -> None:
        if step.events:
            self._pending.extend(step.events)
            if not self.deferred:
                self.flush()
        self._last_t_s = step.output.t_s
        self._last_serial = step.output.serial if step.output.unit_status == "running" else None
        self._enabled = step.output.tool_enabled

    def flush(self) -> None:
        """Commit the held events as one batch (nothing to do when none are held)."""
        if not self._pending:
            return
        held, self._pending = tuple(self._pending), []
        events = held if self.evidence is None else self.evidence.attach(held)
        self.log.append(events, recorded_at_s=self.clock())
        self.events_written += len(events)

    def on_stop(self, error: BaseException | None) -> None:
        """Commits what is held; after a failure the log says the tool went off and why
        (unless the log itself is what failed)."""
        if isinstance(error, StoreError):
            return
        self.flush()
        if error is None:
            return
        event = ev.ToolInhibited(
            t_s=self._last_t_s,
            serial=self._last_serial,
            reason=STOPPED_ON_REQUEST,
            was_enabled=self._enabled,
        )
        if not stop_requested(error):
            event = replace(event, reason=STOPPED_ON_ERROR, error=first_line(error)[:300])
        self.log.append([event], recorded_at_s=self.clock())
        self.events_written += 1
        logger.info("run stopped (%s); tool inhibited and recorded in the log", event.reason)
