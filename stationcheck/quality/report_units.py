"""The report's units to look at: every NOK, reworked, aborted and unfinished unit of the
period with why, its failed positions and their values, each linked to its steps further down
the same file (the report stays one offline file)."""

from __future__ import annotations

import json
import sqlite3
from collections.abc import Sequence
from html import escape

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import RESULT_NOK, Event
from stationcheck.core.result_words import unit_word
from stationcheck.errors import StoreError
from stationcheck.quality.period import Period, format_time
from stationcheck.quality.unit_export import nok_reason
from stationcheck.store import queries
from stationcheck.store.log_records import StepRow, UnitQuery, UnitRow

REPORT_UNITS = 200  # listed; a longer list is cut with a note (the review screen has them all)
LOOK_AT = ("NOK", "reworked", "aborted", "open")


def log_is_demo(conn: sqlite3.Connection) -> bool:
    """Whether the log's newest unit was marked as demo data when it started."""
    newest = conn.execute(
        "SELECT serial FROM units INDEXED BY units_by_start_at ORDER BY started_at_s DESC LIMIT 1"
    ).fetchone()
    if newest is None:
        return False
    starts = _unit_starts(conn, newest[0], "DESC LIMIT 1")
    return bool(starts) and starts[0].demo_data


def _unit_starts(conn: sqlite3.Connection, serial: str, order: str) -> list[ev.UnitStarted]:
    rows = conn.execute(
        "SELECT t_s, kind, serial, data FROM events INDEXED BY events_by_serial "
        f"WHERE serial = ? AND kind = 'unit_started' ORDER BY seq {order}",
        (serial,),
    ).fetchall()
    try:
        starts = [
            Event.from_data(t_s, kind, serial, json.loads(data)) for t_s, kind, serial, data in rows
        ]
    except ValueError as exc:  # also json.JSONDecodeError
        raise StoreError(f"a stored unit_started event of {serial} is malformed: {exc}") from exc
    return [e for e in starts if isinstance(e, ev.UnitStarted)]


def unit_models(conn: sqlite3.Connection, serial: str) -> list[str]:
    """The SHA-256 of the keypoint model that decided each pass of the unit, in pass order
    ("" where the log did not record it)."""
    return [start.model_sha256 for start in _unit_starts(conn, serial, "ASC")]


def units_to_look_at(
    conn: sqlite3.Connection, period: Period, limit: int = REPORT_UNITS
) -> tuple[list[UnitRow], bool]:
    """NOK, reworked, aborted and open units started in the period, oldest first; and whether
    there were more than ``limit``."""
    found: dict[str, UnitRow] = {}
    for result in LOOK_AT:
        query = UnitQuery(
            from_s=period.from_s,
            to_s=period.to_s,
            result=result,
            order="oldest",
            limit=limit + 1,
            count_total=False,
        )
        for unit in queries.find_units(conn, query).rows:
            found[unit.serial] = unit
    ordered = sorted(found.values(), key=lambda u: (u.started_at_s, u.serial))
    return ordered[:limit], len(ordered) > limit


def _value(
    value: float | None, low: float | None, high: float | None, digits: int, unit: str
) -> str:
    if value is None:
        return ""
    outside = (low is not None and value < low) or (high is not None and value > high)
    limits = (
        (
            f" [{'' if low is None else f'{low:.{digits}f}'}-"
            f"{'' if high is None else f'{high:.{digits}f}'}]"
        )
        if low or high
        else ""
    )
    text = f"{value:.{digits}f} {unit}{limits}"
    return f"<strong>{escape(text)} ✖</strong>" if outside else escape(text)


def _nok_attempts(steps: Sequence[StepRow]) -> str:
    shown = []
    for s in steps:
        if s.kind == "fasten" and s.result == RESULT_NOK:
            values = " / ".join(
                v
                for v in (
                    _value(s.torque_nm, s.torque_low_nm, s.torque_high_nm, 2, "N·m"),
                    _value(s.angle_deg, s.angle_low_deg, s.angle_high_deg, 1, "°"),
                )
                if v
            )
            rework = " (rework)" if s.is_rework else ""
            shown.append(f"{escape(s.position or '?')} attempt {s.attempt}{rework}: {values}")
    return "<br>".join(shown) or "-"


def _why(unit: UnitRow, steps: Sequence[StepRow]) -> str:
    if unit.is_open:
        return f"not finished (at step {unit.current_step or '?'})"
    reason = nok_reason(unit, steps)
    if reason and unit.status != RESULT_NOK:
        return f"first pass NOK: {reason}; reworked to {unit_word(unit.status)}"
    return reason or unit_word(unit.status)


def anchor(serial: str) -> str:
    return "unit-" + "".join(c if c.isalnum() or c in "-_" else "_" for c in serial)


def _detail(unit: UnitRow, steps: Sequence[StepRow]) -> str:
    rows = []
    for s in steps:
        left = " (left for rework)" if s.position_result == RESULT_NOK else ""
        rows.append(
            f"<tr><td>{'rework' if s.is_rework else 'first'}</td><td>{escape(s.step)}</td>"
            f"<td>{escape(s.position or '')}</td><td>{s.attempt if s.kind == 'fasten' else ''}"
            f"</td><td>{escape(unit_word(s.result) + left)}</td>"
            f"<td>{_value(s.torque_nm, s.torque_low_nm, s.torque_high_nm, 2, 'N·m')}</td>"
            f"<td>{_value(s.angle_deg, s.angle_low_deg, s.angle_high_deg, 1, '°')}</td>"
            f"<td>{escape(format_time(s.recorded_at_s))}</td></tr>"
        )
    return (
        f'<h3 id="{anchor(unit.serial)}">{escape(unit.serial)}: '
        f"{escape(unit_word(unit.status))}{' (reworked)' if unit.reworked else ''}</h3>"
        f'<p>{escape(_why(unit, steps))}. <a href="#units-to-look-at">back to the list</a>'
        "</p><table><tr><th>pass</th><th>step</th><th>position</th><th>attempt</th>"
        "<th>result</th><th>torque [limits]</th><th>angle [limits]</th><th>recorded at</th>"
        f"</tr>{''.join(rows)}</table>"
    )


def units_section(conn: sqlite3.Connection, period: Period) -> list[str]:
    """The list (one row per unit, linked) and each unit's steps, as HTML parts."""
    units, cut = units_to_look_at(conn, period)
    parts = ['<h2 id="units-to-look-at">Units to look at: NOK, reworked, aborted, open</h2>']
    if not units:
        return [
            *parts,
            ('<p class="calm">none in this period: every unit ended OK the first time.</p>'),
        ]
    steps = {u.serial: queries.steps_of(conn, u.serial) for u in units}
    rows = []
    for unit in units:
        failed = ", ".join(unit.failed_positions) or "-"
        rows.append(
            f'<tr><td><a href="#{anchor(unit.serial)}">{escape(unit.serial)}</a></td>'
            f"<td>{escape(unit_word(unit.status))}{' (reworked)' if unit.reworked else ''}"
            f"</td><td>{escape(failed)}</td><td>{_nok_attempts(steps[unit.serial])}</td>"
            f"<td>{escape(_why(unit, steps[unit.serial]))}</td>"
            f"<td>{escape(format_time(unit.started_at_s))}</td></tr>"
        )
    parts.append(
        '<table class="units"><tr><th>serial</th><th>result</th><th>failed '
        "positions</th><th>NOK attempts (✖ outside its limits)</th><th>why</th>"
        f"<th>started</th></tr>{''.join(rows)}</table>"
    )
    if cut:
        parts.append(
            f'<p class="finding">more than {REPORT_UNITS} units to look at; the '
            "first are listed (the review screen's unit list has them all)</p>"
        )
    parts.append("<h2>Steps of the units to look at</h2>")
    parts += [_detail(unit, steps[unit.serial]) for unit in units]
    return parts
