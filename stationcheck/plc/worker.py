"""The link worker: all PLC I/O on its own thread, so the frame loop never waits for the PLC.

The loop :meth:`LinkWorker.publish` es its newest outputs and :meth:`LinkWorker.take` s the
observations decoded since the last call; neither blocks on I/O. The worker writes the newest
outputs when they differ from what it last wrote (and every ``refresh_s``), and reads the inputs
every ``cycle_s``.

Link up means: the exchange works and the PLC's ``plc_liveness`` counter changed within
``liveness_timeout_s`` (when set). The worker itself writes the enable off in the step that finds
the link not up, and keeps it off while it is not: the PLC (or the server-mode image) never shows
an enable the station no longer grants. Any I/O failure (refused, exception response, no answer)
closes the connection; the next attempt waits an exponential back-off with jitter, capped, that
only a link up for ``healthy_s`` resets: at most 1 / ``backoff_first_s`` new connections per
second, one at a time. Outputs the loop has not renewed for ``stale_outputs_s`` are written with
the enable off: a stuck loop cannot leave the tool enabled. When the link itself is gone, only the
PLC can act: it must drop the enable when the heartbeat stops changing.
"""

from __future__ import annotations

import logging
import random
import threading
import time
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from stationcheck.core.observations import LinkEvent, LinkStatus, Observation
from stationcheck.errors import first_line
from stationcheck.plc.link import SignalLink
from stationcheck.plc.link_session import InputDecoder, SessionSettings
from stationcheck.plc.signals import OutputSignals

logger = logging.getLogger(__name__)

Clock = Callable[[], float]


@dataclass(frozen=True)
class WorkerSettings:
    # The enable is written the moment it changes, the other outputs when they change (at most
    # once per cycle_s when only the heartbeat moved), everything every refresh_s; inputs are
    # read every cycle_s. Each Modbus request is Python work under the interpreter lock.
    cycle_s: float = 0.05
    refresh_s: float = 1.0
    stale_outputs_s: float = 0.1
    backoff_first_s: float = 0.5  # also the least time between two connection attempts
    backoff_max_s: float = 5.0
    backoff_jitter: float = 0.2  # each wait is drawn within +-20 % of the back-off
    healthy_s: float = 10.0  # a link up this long resets the back-off
    liveness_timeout_s: float | None = None  # None: the PLC's liveness counter is not watched
    session: SessionSettings = field(default_factory=SessionSettings)


class LinkWorker:
    def __init__(
        self,
        link: SignalLink,
        clock: Clock = time.monotonic,
        settings: WorkerSettings | None = None,
        seed: int | None = None,
    ) -> None:
        self.link = link
        self.clock = clock
        self.settings = settings or WorkerSettings()
        self.decoder = InputDecoder(self.settings.session)
        self.random = random.Random(seed)
        self.watch_liveness = self.settings.liveness_timeout_s is not None and getattr(
            link, "has_liveness", False
        )
        self._liveness: int | None = None
        self._liveness_at: float | None = None  # perf_counter of its last change
        self._first_liveness_at = 0.0  # its first reading on this connection
        self._liveness_hint_given = False
        self._connected = False
        self._up_since = 0.0
        self._lock = threading.Lock()
        self._wake = threading.Event()
        self._stop = threading.Event()
        self._outputs = OutputSignals()
        self._published_at = time.perf_counter()
        self._since_s: float | None = None
        self._written_version = -1
        self._version = 0
        self._found: list[Observation] = []
        self._acks = (0, 0)
        self.acks = (0, 0)  # (unit_ack, result_ack) of what the last take() handed out
        self._thread: threading.Thread | None = None
        self.up = False
        self.last_ok_s: float | None = None  # perf_counter of the last full exchange
        self.failures = 0
        self.connects = 0
        self.attempts = 0  # connection attempts, failed ones included
        self.last_error = ""
        self.coil_latency_ms: deque[float] = deque(maxlen=10_000)  # frame in hand -> coil
        self.write_latency_ms: deque[float] = deque(maxlen=10_000)  # frame in hand -> written
        self.publish_latency_ms: deque[float] = deque(maxlen=10_000)  # decision -> written
        self.last_written = OutputSignals()
        self._measured_since_s: float | None = None
        self._refreshed_at = float("-inf")
        self._written_at = float("-inf")
        self._read_at = float("-inf")

    # --- the frame loop's side (never blocks on I/O) ---
    def publish(self, outputs: OutputSignals, since_s: float | None = None) -> None:
        """``since_s`` (perf_counter) is when the decision's input (a frame) was in hand: the
        time from there to these outputs written is kept in ``write_latency_ms``."""
        with self._lock:
            self._outputs = outputs
            self._published_at = time.perf_counter()
            self._since_s = since_s
            self._version += 1
        self._wake.set()

    def take(self) -> list[Observation]:
        with self._lock:
            found, self._found = self._found, []
            self.acks = self._acks
        return found

    def silent_s(self) -> float:
        """Seconds since the last complete exchange with the PLC (inf before the first)."""
        last = self.last_ok_s
        return float("inf") if last is None else time.perf_counter() - last

    def start(self) -> LinkWorker:
        self._thread = threading.Thread(target=self._run, name="signal-link", daemon=True)
        self._thread.start()
        return self

    def stop(self, timeout_s: float = 2.0) -> None:
        """Ends the worker; its last act is to write the enable off (best effort)."""
        with self._lock:
            self._outputs = self._outputs.inhibited()
            self._version += 1
        self._stop.set()
        self._wake.set()
        if self._thread is not None:
            self._thread.join(timeout_s)
            if self._thread.is_alive():
                logger.error("the signal link thread did not end within %.1f s", timeout_s)

    # --- the worker's side ---
    def _run(self) -> None:
        backoff_s = self.settings.backoff_first_s
        next_attempt = float("-inf")
        try:
            while not self._stop.is_set():
                if not self._connected:
                    if not self._stop.wait(max(0.0, next_attempt - time.perf_counter())):
                        next_attempt = time.perf_counter() + self._jittered(backoff_s)
                        backoff_s = min(backoff_s * 2, self.settings.backoff_max_s)
                        self._connected = self._connect()
                    continue
                try:
                    self._exchange()
                except Exception as exc:  # noqa: BLE001 - any I/O failure means link down
                    self._down(exc)
                    continue
                if self.up and time.perf_counter() - self._up_since >= self.settings.healthy_s:
                    backoff_s = self.settings.backoff_first_s
                self._wake.wait(self.settings.cycle_s)
                self._wake.clear()
        finally:
            self._final_inhibit()

    def _jittered(self, backoff_s: float) -> float:
        jitter = self.settings.backoff_jitter
        return backoff_s * self.random.uniform(1.0 - jitter, 1.0 + jitter)

    def _connect(self) -> bool:
        self.attempts += 1
        try:
            self.link.connect()
        except Exception as exc:  # noqa: BLE001
            self._note_error(exc)
            return False
        self.connects += 1
        self._refreshed_at = float("-inf")  # a new connection gets every output at once
        self.last_written = OutputSignals()
        self._liveness = self._liveness_at = None  # the counter must change on this connection
        return True

    def _exchange(self) -> None:
        with self._lock:
            outputs, version, published_at = self._outputs, self._version, self._published_at
            since_s = self._since_s
        if outputs.tool_enable and (
            not self.up or time.perf_counter() - published_at > self.settings.stale_outputs_s
        ):
            outputs = outputs.inhibited()
        now = time.perf_counter()
        wrote = self._write(outputs, now)
        if version != self._written_version:
            self._written_version = version
            if wrote and since_s is not None and since_s != self._measured_since_s:
                self._measured_since_s = since_s  # the first write that carries this frame
                done = time.perf_counter()
                coil_at = getattr(self.link, "coil_written_at", None) or done
                if coil_at < now:  # the enable did not change: the decision went out as written
                    coil_at = done
                self.coil_latency_ms.append((coil_at - since_s) * 1e3)
                self.write_latency_ms.append((done - since_s) * 1e3)
                self.publish_latency_ms.append((done - published_at) * 1e3)
        if now - self._read_at < self.settings.cycle_s * 0.9:
            return  # the inputs are fresh
        self._read_at = now
        inputs = self.link.read_inputs()
        now_s = self.clock()
        found = self.decoder.decode(inputs, now_s)
        read_at = time.perf_counter()
        alive = self._alive(inputs.plc_liveness, read_at)
        if alive:
            self.last_ok_s = read_at
        if alive and not self.up:
            self.up = True
            self._up_since = read_at
            logger.info("signal link %s up", self.link.name)
            found.insert(0, LinkStatus(t_s=now_s, ok=True))
        elif not alive and self.up:
            self._not_up(outputs)
            detail = (
                f"the PLC's liveness counter stayed {inputs.plc_liveness} for more than "
                f"{self.settings.liveness_timeout_s} s"
            )
            logger.warning("signal link %s: %s", self.link.name, detail)
            found.extend(
                [
                    LinkStatus(t_s=now_s, ok=False),
                    LinkEvent(t_s=now_s, code="plc_not_alive", detail=detail),
                ]
            )
        with self._lock:
            self._found.extend(found)
            self._acks = (self.decoder.unit_ack, self.decoder.result_ack)

    def _write(self, outputs: OutputSignals, now: float) -> bool:
        """Writes what changed; when only the heartbeat moved, at most once per cycle."""
        last = self.last_written
        refresh = now - self._refreshed_at >= self.settings.refresh_s
        if outputs == last and not refresh:
            return False
        if (
            not refresh
            and outputs.tool_enable == last.tool_enable
            and replace(outputs, heartbeat=last.heartbeat) == last
            and now - self._written_at < self.settings.cycle_s
        ):
            return False
        self.link.write_outputs(outputs, refresh)
        self._written_at = now
        if refresh:
            self._refreshed_at = now
        self.last_written = outputs
        return True

    def _alive(self, liveness: int, now: float) -> bool:
        if not self.watch_liveness:
            return True
        if self._liveness is None or liveness != self._liveness:
            if self._liveness is not None:
                self._liveness_at = now
            else:
                self._first_liveness_at = now
            self._liveness = liveness
        timeout_s = self.settings.liveness_timeout_s
        assert timeout_s is not None
        if (
            self._liveness_at is None
            and now - self._first_liveness_at > timeout_s
            and not self._liveness_hint_given
        ):
            self._liveness_hint_given = True
            self.last_error = (
                f"the PLC's plc_liveness counter stays at {liveness}: the link "
                "stays down until the PLC program counts it up"
            )
            logger.warning("signal link %s: %s", self.link.name, self.last_error)
        return self._liveness_at is not None and now - self._liveness_at <= timeout_s

    def _not_up(self, outputs: OutputSignals) -> None:
        """Link no longer up: the enable goes off in this same step (best effort)."""
        self.up = False
        if outputs.tool_enable or self.last_written.tool_enable:
            try:
                off = outputs.inhibited()
                self.link.write_outputs(off, False)
                self.last_written = off
            except Exception as exc:  # noqa: BLE001
                logger.debug("writing the enable off failed: %s", exc)

    def _down(self, exc: Exception) -> None:
        self._note_error(exc)
        self._connected = False
        was_up = self.up
        if was_up:
            with self._lock:
                outputs = self._outputs
            self._not_up(outputs)  # reaches a server-mode image even with no PLC at all
        try:
            self.link.close()
        except Exception:
            logger.debug("closing the broken link failed", exc_info=True)
        if was_up:
            logger.warning("signal link %s lost: %s", self.link.name, exc)
            with self._lock:
                self._found.append(LinkStatus(t_s=self.clock(), ok=False))

    def _note_error(self, exc: Exception) -> None:
        self.failures += 1
        message = first_line(exc)
        if message != self.last_error:
            logger.warning("signal link %s: %s", self.link.name, message)
        self.last_error = message

    def _final_inhibit(self) -> None:
        if self._connected:
            try:
                with self._lock:
                    outputs = self._outputs.inhibited()
                self.link.write_outputs(outputs, True)
                self.last_written = outputs
            except Exception as exc:  # noqa: BLE001
                logger.warning("could not write the enable off on stop: %s", exc)
        try:
            self.link.close()
        except Exception:
            logger.debug("closing the link failed", exc_info=True)
        self.up = False
