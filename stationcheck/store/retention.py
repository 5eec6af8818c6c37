"""Evidence images and old rows past the retention limit.

Evidence images are off by default; when the station saves one (cropped to the fastener zone) it
puts the file's path into the event with :func:`with_evidence`, and the log only keeps the path.
:func:`apply_retention` deletes evidence files older than the limit (the rows keep the path; a
reader treats a missing file as removed by retention) and, if asked, whole units that are
resolved and ended before the limit: their events and derived rows together. Open units are
never touched, and by default neither are units that ended unreleased (NOK or aborted), whose
events a rework pass needs.
"""

from __future__ import annotations

import logging
import os
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Literal

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import Event
from stationcheck.store.sqlite_errors import store_errors
from stationcheck.store.sqlite_log import SqliteStepLog
from stationcheck.store.write_transaction import write_transaction

logger = logging.getLogger(__name__)

SECONDS_PER_DAY = 86_400.0
DELETE_BATCH_UNITS = 500
Basis = Literal["t_s", "recorded_at"]


def with_evidence(event: Event, path: str | os.PathLike[str]) -> Event:
    """The event with an evidence image path attached (for a tightening result or a step)."""
    if not isinstance(event, ev.TighteningResult | ev.StepCompleted):
        raise TypeError(
            f"an evidence image belongs to a tightening result or a step, not to {event.kind}"
        )
    return replace(event, evidence_path=str(path))


@dataclass(frozen=True)
class RetentionReport:
    evidence_files_removed: int = 0
    evidence_files_missing: int = 0
    units_removed: int = 0
    events_removed: int = 0


def _remove_evidence(
    log: SqliteStepLog, cutoff_s: float, basis: Basis, root: Path | None
) -> tuple[int, int]:
    column = "ended_t_s" if basis == "t_s" else "recorded_at_s"
    with store_errors(log.path, "finding old evidence images"):
        paths = [
            str(row[0])
            for row in log.connection.execute(
                f"SELECT evidence_path FROM steps WHERE evidence_path IS NOT NULL AND {column} < ?",
                (cutoff_s,),
            )
        ]
    removed = missing = 0
    for text in paths:
        path = Path(text)
        if root is not None and not path.is_absolute():
            path = root / path
        try:
            path.unlink()
            removed += 1
        except FileNotFoundError:
            missing += 1
        except OSError as exc:
            logger.warning("evidence image %s could not be removed: %s", path, exc)
    return removed, missing


def _remove_units(
    log: SqliteStepLog, cutoff_s: float, basis: Basis, keep_unreleased: bool
) -> tuple[int, int]:
    start, end = ("started_t_s", "ended_t_s") if basis == "t_s" else ("started_at_s", "ended_at_s")
    statuses = "('OK')" if keep_unreleased else "('OK', 'NotOK', 'NotDecidable')"
    conn = log.connection
    units = events = 0
    while True:
        with store_errors(log.path, "removing old units"), write_transaction(conn):
            serials = [
                (row[0],)
                for row in conn.execute(
                    f"SELECT serial FROM units WHERE status IN {statuses} AND {start} < ? "
                    f"AND {end} < ? LIMIT ?",
                    (cutoff_s, cutoff_s, DELETE_BATCH_UNITS),
                )
            ]
            for table in ("steps", "alarms", "unit_tags", "units"):
                conn.executemany(f"DELETE FROM {table} WHERE serial = ?", serials)
            before = conn.total_changes
            conn.executemany("DELETE FROM events WHERE serial = ?", serials)
            events += conn.total_changes - before
        units += len(serials)
        if len(serials) < DELETE_BATCH_UNITS:
            return units, events


def _remove_station_events(log: SqliteStepLog, cutoff_s: float, basis: Basis) -> int:
    column = "t_s" if basis == "t_s" else "recorded_at_s"
    conn = log.connection
    with store_errors(log.path, "removing old station events"), write_transaction(conn):
        conn.execute(f"DELETE FROM alarms WHERE serial IS NULL AND {column} < ?", (cutoff_s,))
        count = conn.execute(
            f"DELETE FROM events WHERE serial IS NULL AND {column} < ?", (cutoff_s,)
        ).rowcount
    return int(count)


def apply_retention(
    log: SqliteStepLog,
    retention_days: float,
    now_s: float,
    *,
    basis: Basis = "recorded_at",
    evidence: bool = True,
    rows: bool = False,
    keep_unreleased: bool = True,
    evidence_root: Path | None = None,
) -> RetentionReport:
    """Delete what is older than ``retention_days`` before ``now_s`` (on ``basis``: the events'
    ``t_s`` or the wall-clock ``recorded_at``). ``evidence``: image files; ``rows``: resolved
    units with their events, and station-level events. Relative evidence paths are taken from
    ``evidence_root``."""
    if log.readonly:
        raise ValueError("retention needs a step log opened for writing")
    if not retention_days > 0:
        raise ValueError(f"retention_days must be > 0, got {retention_days!r}")
    cutoff_s = now_s - retention_days * SECONDS_PER_DAY
    removed = missing = units = events = 0
    if evidence:
        removed, missing = _remove_evidence(log, cutoff_s, basis, evidence_root)
    if rows:
        units, events = _remove_units(log, cutoff_s, basis, keep_unreleased)
        events += _remove_station_events(log, cutoff_s, basis)
    report = RetentionReport(removed, missing, units, events)
    logger.info("retention (%g days) on %s: %s", retention_days, log.path, report)
    return report
