"""Per-unit summary of a run, from its events: one line per pass of a unit."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import RESULT_OK, Event
from stationcheck.core.result_words import UNIT_OPEN, unit_word


@dataclass(frozen=True)
class UnitPass:
    serial: str
    rework: bool
    started_t_s: float
    result: str  # OK, NOK, aborted or open (core.result_words)
    released: bool
    ended_by: str  # completed, new_unit, abort, stopped_on_failure, open_at_end
    failed_positions: tuple[str, ...]
    unfinished_positions: tuple[str, ...]
    cycle_time_s: float
    tightenings: int
    nok_results: int
    alarms: tuple[str, ...]

    @property
    def pass_name(self) -> str:
        return "rework" if self.rework else "first"

    def to_dict(self) -> dict[str, Any]:
        return {
            "serial": self.serial,
            "pass": self.pass_name,
            "result": self.result,
            "released": self.released,
            "ended_by": self.ended_by,
            "failed_positions": list(self.failed_positions),
            "unfinished_positions": list(self.unfinished_positions),
            "cycle_time_s": round(self.cycle_time_s, 3),
            "tightenings": self.tightenings,
            "nok_results": self.nok_results,
            "alarms": list(self.alarms),
        }


@dataclass
class _Open:
    serial: str
    rework: bool
    started_t_s: float
    tightenings: int = 0
    nok_results: int = 0


def summarise_units(events: Iterable[Event], end_t_s: float | None = None) -> list[UnitPass]:
    """Every pass that started in ``events``, in start order; a pass still open at the end is
    "open" with its cycle time counted to ``end_t_s`` (or its last event)."""
    passes: list[UnitPass] = []
    current: _Open | None = None
    alarms: list[str] = []
    last_t_s = 0.0
    for event in events:
        last_t_s = max(last_t_s, event.t_s)
        if isinstance(event, ev.UnitStarted) and event.serial is not None:
            current = _Open(event.serial, event.rework, event.t_s)
            alarms = []
        elif current is None or event.serial != current.serial:
            continue
        elif isinstance(event, ev.TighteningResult):
            current.tightenings += 1
            current.nok_results += event.result != RESULT_OK
        elif isinstance(event, ev.AlarmRaised):
            alarms.append(event.code)
        elif isinstance(event, ev.UnitEnded):
            passes.append(
                UnitPass(
                    serial=current.serial,
                    rework=current.rework,
                    started_t_s=current.started_t_s,
                    result=unit_word(event.result),
                    released=event.released,
                    ended_by=event.ended_by,
                    failed_positions=tuple(r.zone for r in event.failed_positions),
                    unfinished_positions=tuple(r.zone for r in event.unfinished_positions),
                    cycle_time_s=event.cycle_time_s,
                    tightenings=current.tightenings,
                    nok_results=current.nok_results,
                    alarms=tuple(alarms),
                )
            )
            current = None
    if current is not None:
        end = end_t_s if end_t_s is not None else last_t_s
        passes.append(
            UnitPass(
                serial=current.serial,
                rework=current.rework,
                started_t_s=current.started_t_s,
                result=unit_word(UNIT_OPEN),
                released=False,
                ended_by="open_at_end",
                failed_positions=(),
                unfinished_positions=(),
                cycle_time_s=max(0.0, end - current.started_t_s),
                tightenings=current.tightenings,
                nok_results=current.nok_results,
                alarms=tuple(alarms),
            )
        )
    return passes


def format_unit_table(passes: Iterable[UnitPass]) -> list[str]:
    header = (
        f"{'serial':<12} {'pass':<7} {'result':<13} {'failed positions':<22} "
        f"{'cycle time':>10}  notes"
    )
    lines = [header]
    for p in passes:
        failed = ", ".join(p.failed_positions) or "-"
        notes = []
        if p.ended_by not in ("completed",):
            notes.append(p.ended_by.replace("_", " "))
        if p.nok_results:
            notes.append(f"{p.nok_results} NOK result{'s' if p.nok_results > 1 else ''}")
        shown_alarms = sorted(set(p.alarms))
        if shown_alarms:
            notes.append("alarms: " + ", ".join(shown_alarms))
        lines.append(
            f"{p.serial:<12} {p.pass_name:<7} {p.result:<13} {failed:<22} "
            f"{p.cycle_time_s:>9.1f}s  {'; '.join(notes)}"
        )
    return lines
