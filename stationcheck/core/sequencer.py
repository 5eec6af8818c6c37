"""The pure station state machine: ``next_state, output, events = sequencer.step(state, obs)``.

Nothing here reads a clock or does I/O: time is the observations' ``t_s`` (never allowed to run
backwards: an older timestamp counts as "now"). The same observations from the same state give
the same outputs and events, so a recorded stream replays exactly. See :mod:`transitions` for the
table and :mod:`conditions` for the enable rules.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, replace

from stationcheck.core import event_kinds as ev
from stationcheck.core.conditions import settle
from stationcheck.core.events import Event
from stationcheck.core.guidance import render_output
from stationcheck.core.observations import Observation
from stationcheck.core.outputs import Output
from stationcheck.core.plan import StationPlan
from stationcheck.core.progress import rebuild_unit
from stationcheck.core.state import SequencerState, ToolControl
from stationcheck.core.transaction import PlanIndex, Transaction
from stationcheck.core.transitions import handler_for


@dataclass(frozen=True)
class Replay:
    state: SequencerState
    outputs: tuple[Output, ...]
    events: tuple[Event, ...]


class Sequencer:
    """Holds the plan (read-only) and offers the pure step; the state lives with the caller."""

    def __init__(self, plan: StationPlan) -> None:
        self.plan = plan
        self._index = PlanIndex(plan)

    def initial_state(self) -> SequencerState:
        """Inhibited, no unit, no frame seen yet."""
        return SequencerState()

    def step(
        self, state: SequencerState, observation: Observation
    ) -> tuple[SequencerState, Output, tuple[Event, ...]]:
        now_t_s = observation.t_s
        if state.now_t_s is not None:
            now_t_s = max(now_t_s, state.now_t_s)
        tx = Transaction(self._index, state, now_t_s)
        handler_for(tx.phase, observation.kind)(tx, observation)
        settle(tx)
        return tx.state, render_output(self._index, tx.state), tuple(tx.events)

    def replay(
        self, observations: Iterable[Observation], state: SequencerState | None = None
    ) -> Replay:
        state = state if state is not None else self.initial_state()
        outputs: list[Output] = []
        events: list[Event] = []
        for observation in observations:
            state, output, new_events = self.step(state, observation)
            outputs.append(output)
            events.extend(new_events)
        return Replay(state=state, outputs=tuple(outputs), events=tuple(events))

    def rebuild(self, events: Iterable[Event]) -> SequencerState:
        """The state to continue from after a restart, given the logged events (at least those
        of the open unit). The unit is exactly as it was; everything about the tool and the
        station starts over inhibited and is re-learned from the next observations."""
        events = tuple(events)
        sequences = [
            e.sequence
            for e in events
            if isinstance(e, ev.TighteningResult | ev.AlarmRaised) and e.sequence is not None
        ]
        control = ToolControl(last_sequence=sequences[-1] if sequences else None)
        return SequencerState(
            now_t_s=events[-1].t_s if events else None,
            unit=rebuild_unit(events),
            control=self._rebuild_hold_off(events, control),
        )

    def _rebuild_hold_off(self, events: tuple[Event, ...], control: ToolControl) -> ToolControl:
        """The dwell after the last result or reset still holds after a restart."""
        reasons = {"tightening_result": "new_attempt_dwell", "station_reset": "reset_hold"}
        last = next((e for e in reversed(events) if e.kind in reasons), None)
        if last is None:
            return control
        return replace(
            control,
            hold_off_until_t_s=last.t_s + self._index.dwell_ms / 1000.0,
            hold_off_reason=reasons[last.kind],
        )
