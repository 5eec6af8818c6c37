"""Ships a station's step-log events to the plant database, in order, in batches, exactly once.

Exactly once: the server keeps each station's high-water mark (the last seq it holds) and
``plant.forward_events`` inserts only events beyond it, keyed by (station id, seq), so a batch
sent twice (a lost answer, a restart of either side) is stored once. After every (re)connect
the forwarder asks the server for the mark and continues from there, so a server restored from
an older backup gets the missing events again. Connection failures back off (doubling, with
jitter, up to a limit) and retry for ever; a login that is refused or a role that is not the
station's is an error that retrying cannot fix. The local log is only read (``mode=ro``).
"""

from __future__ import annotations

import logging
import random
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from stationcheck.errors import PlantDatabaseError, StoreError, first_line
from stationcheck.plant.connect import connect, driver, redacted
from stationcheck.store.sqlite_log import SqliteStepLog

logger = logging.getLogger(__name__)

BATCH_EVENTS = 5000
POLL_S = 0.5
PROGRESS_EVERY_S = 10.0
_FORWARD_SQL = (
    "SELECT plant.forward_events(%s, %s::bigint[], %s::float8[], %s::text[], "
    "%s::text[], %s::text[], %s::float8[])"
)
# libpq: notice a dead server or network within about 10 s instead of the system's minutes
_KEEPALIVE: dict[str, Any] = {
    "keepalives": 1,
    "keepalives_idle": 5,
    "keepalives_interval": 2,
    "keepalives_count": 2,
    "tcp_user_timeout": 10_000,
}
_FATAL_SQLSTATES = {"42501", "42883", "42P01", "3F000", "28000", "28P01"}


@dataclass(frozen=True)
class Backoff:
    """Waits between reconnect attempts: ``first_s`` doubling up to ``max_s``, +-``jitter``."""

    first_s: float = 0.5
    max_s: float = 30.0
    jitter: float = 0.2

    def delay_s(self, failures: int) -> float:
        base = min(self.max_s, self.first_s * 2.0 ** max(0, failures - 1))
        return float(base * (1.0 + random.uniform(-self.jitter, self.jitter)))


@dataclass(frozen=True)
class ForwardStatus:
    """Where forwarding stands. ``lag_s`` is the wall-clock age of the oldest event the server
    does not hold yet (0 when caught up)."""

    station_id: str
    connected: bool = False
    server_seq: int | None = None  # the server's high-water mark (None before the first answer)
    local_seq: int = 0
    lag_events: int = 0
    lag_s: float = 0.0
    forwarded: int = 0  # events sent by this forwarder (since it started)
    events_per_s: float = 0.0
    failures: int = 0
    last_error: str | None = None

    def line(self) -> str:
        state = (
            "connected"
            if self.connected
            else f"not connected ({self.last_error})"
            if self.last_error
            else "not connected"
        )
        return (
            f"forwarding {self.station_id}: {state}; server at seq {self.server_seq}, "
            f"local {self.local_seq}; behind {self.lag_events} events, {self.lag_s:.1f} s"
        )


class Forwarder:
    """One station's forwarder; :meth:`run` until ``stop`` is set (its own thread or process)."""

    def __init__(
        self,
        log_path: Path,
        station_id: str,
        url: str,
        password_file: Path | None = None,
        *,
        batch_events: int = BATCH_EVENTS,
        poll_s: float = POLL_S,
        backoff: Backoff = Backoff(),
        wall_clock: Callable[[], float] = time.time,
    ) -> None:
        self.log_path = log_path
        self.station_id = station_id
        self.url = url
        self.password_file = password_file
        self.batch_events = batch_events
        self.poll_s = poll_s
        self.backoff = backoff
        self._wall_clock = wall_clock
        self._conn: Any = None
        self._log: SqliteStepLog | None = None
        self._lock = threading.Lock()
        self._status = ForwardStatus(station_id)
        self._rate_window: list[tuple[float, int]] = []
        self._last_progress_s = 0.0

    @property
    def status(self) -> ForwardStatus:
        with self._lock:
            return self._status

    def _set(self, **changes: Any) -> None:
        with self._lock:
            self._status = ForwardStatus(**{**self._status.__dict__, **changes})

    # ---- the two ends
    def _local(self) -> SqliteStepLog:
        if self._log is None:
            self._log = SqliteStepLog(self.log_path, readonly=True)
        return self._log

    def _connect(self) -> Any:
        if self._conn is None:
            self._conn = connect(
                self.url, self.password_file, application="stationcheck forward", **_KEEPALIVE
            )
            mark = self._conn.execute(
                "SELECT plant.station_high_water_mark(%s)", (self.station_id,)
            ).fetchone()[0]
            self._set(connected=True, server_seq=int(mark), last_error=None)
            logger.info(
                "connected to %s as station %s; the server holds seq 1..%d",
                redacted(self.url),
                self.station_id,
                mark,
            )
        return self._conn

    def _disconnect(self) -> None:
        if self._conn is not None:
            try:
                self._conn.close()
            except Exception as exc:  # noqa: BLE001 - a broken connection may fail to close too
                logger.debug("closing a broken connection: %s", first_line(exc))
            self._conn = None
        self._set(connected=False)

    def close(self) -> None:
        self._disconnect()
        if self._log is not None:
            self._log.close()
            self._log = None

    # ---- one pass
    def _batch(self, after_seq: int) -> list[tuple[Any, ...]]:
        rows = self._local().raw_events(after_seq, self.batch_events)
        for row in rows:
            owner = row[6]
            if owner is not None and owner != self.station_id:
                raise StoreError(
                    f"step log {self.log_path} holds events of station {owner!r} (seq {row[0]}),"
                    f" not of {self.station_id!r}: forward each station's log with its own config"
                )
        return rows

    def _send(self, rows: list[tuple[Any, ...]]) -> int:
        columns = list(zip(*rows, strict=True))
        mark = (
            self._connect()
            .execute(
                _FORWARD_SQL,
                (
                    self.station_id,
                    list(columns[0]),
                    list(columns[1]),
                    list(columns[2]),
                    list(columns[3]),
                    list(columns[4]),
                    list(columns[5]),
                ),
            )
            .fetchone()[0]
        )
        return int(mark)

    def _update_lag(self) -> None:
        local = self._local()
        local_seq, _ = local.last_seq()
        server = self._status.server_seq or 0
        oldest = local.recorded_at(server + 1) if local_seq > server else None
        lag_s = max(0.0, self._wall_clock() - oldest) if oldest is not None else 0.0
        now = time.monotonic()
        window = [(t, n) for t, n in self._rate_window if now - t <= 10.0]
        self._rate_window = window
        span = now - window[0][0] if len(window) > 1 else 0.0
        rate = sum(n for _, n in window[1:]) / span if span > 0 else 0.0
        self._set(
            local_seq=local_seq,
            lag_events=max(0, local_seq - server),
            lag_s=lag_s,
            events_per_s=rate,
        )

    def forward_once(self) -> int:
        """Send everything the server lacks, batch by batch; returns the events sent. A failed
        connection or statement raises :class:`PlantDatabaseError` (the driver's error as its
        cause)."""
        psycopg = driver()
        try:
            return self._forward_all()
        except psycopg.Error as exc:
            raise PlantDatabaseError(
                f"plant database {redacted(self.url)}: {first_line(exc)}"
            ) from exc

    def _forward_all(self) -> int:
        sent = 0
        if self._log is None and not self.log_path.is_file():  # the station has not started
            self._set(last_error=f"waiting for the step log {self.log_path}")
            return 0
        self._connect()
        while True:
            server = self._status.server_seq or 0
            rows = self._batch(server)
            if not rows:
                break
            mark = self._send(rows)
            sent += len(rows)
            self._rate_window.append((time.monotonic(), len(rows)))
            self._set(server_seq=mark, forwarded=self._status.forwarded + len(rows))
            if mark < int(rows[-1][0]):
                raise PlantDatabaseError(
                    f"the plant database kept station {self.station_id} at seq {mark} after a "
                    f"batch up to {rows[-1][0]}"
                )
            self._update_lag()
            self._log_progress()
        self._update_lag()
        return sent

    def _log_progress(self, force: bool = False) -> None:
        now = time.monotonic()
        if force or now - self._last_progress_s >= PROGRESS_EVERY_S:
            self._last_progress_s = now
            status = self._status
            logger.info(
                "%s (%d sent, %.0f events/s)", status.line(), status.forwarded, status.events_per_s
            )

    def run(self, stop: threading.Event) -> None:
        """Forward until ``stop`` is set: poll the log, back off while the server is away."""
        failures = 0
        try:
            while not stop.is_set():
                try:
                    self.forward_once()
                    failures = 0
                    stop.wait(self.poll_s)
                except PlantDatabaseError as exc:
                    if getattr(exc.__cause__, "sqlstate", None) in _FATAL_SQLSTATES:
                        raise
                    failures = self._after_failure(failures, str(exc))
                    stop.wait(self.backoff.delay_s(failures))
            if self._status.connected:  # what the station logged while it was stopping
                try:
                    self.forward_once()
                except PlantDatabaseError as exc:
                    logger.warning("last pass before stopping failed: %s", exc)
        finally:
            self._log_progress(force=True)
            self.close()

    def _after_failure(self, failures: int, message: str) -> int:
        self._disconnect()
        failures += 1
        self._set(failures=self._status.failures + 1, last_error=message)
        try:
            self._update_lag()
        except StoreError:
            pass
        logger.warning(
            "plant database unreachable (%s); retry %d in about %.1f s; %s",
            message,
            failures,
            self.backoff.delay_s(failures),
            self._status.line(),
        )
        return failures
