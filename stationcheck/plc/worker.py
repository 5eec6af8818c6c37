"""The link worker: all PLC I/O on its own thread, so the frame loop never waits for the PLC.

The loop :meth:`LinkWorker.publish` es its newest outputs and :meth:`LinkWorker.take` s the
observations decoded since the last call; neither blocks on I/O. The worker writes the newest
outputs when they differ from what it last wrote (and every ``refresh_s``), and reads the inputs
after each write and at least every ``cycle_s``. Any failure marks the link down (a
``LinkStatus(ok=False)`` for the sequencer), closes it, and retries with a growing back-off. Outputs the loop has not
renewed for ``stale_outputs_s`` are written with the enable off: a stuck loop cannot leave the
tool enabled as long as the link still works. When the link itself is gone, only the PLC can
act: it must drop the enable when the heartbeat stops changing.
"""

from __future__ import annotations

import logging
import threading
import time
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass

from stationcheck.core.observations import LinkStatus, Observation
from stationcheck.errors import first_line
from stationcheck.plc.link import SignalLink
from stationcheck.plc.signals import InputDecoder, OutputSignals

logger = logging.getLogger(__name__)

Clock = Callable[[], float]


@dataclass(frozen=True)
class WorkerSettings:
    # Outputs are written when they change (about once per frame) and refreshed every
    # refresh_s; inputs are read after every write and at least every cycle_s. A tighter cycle
    # costs the loop: each Modbus request is Python work under the interpreter lock.
    cycle_s: float = 0.02
    refresh_s: float = 1.0
    stale_outputs_s: float = 0.1
    backoff_first_s: float = 0.05
    backoff_max_s: float = 2.0


class LinkWorker:
    def __init__(self, link: SignalLink, clock: Clock = time.monotonic,
                 settings: WorkerSettings | None = None) -> None:
        self.link = link
        self.clock = clock
        self.settings = settings or WorkerSettings()
        self.decoder = InputDecoder()
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
        self.last_error = ""
        self.coil_latency_ms: deque[float] = deque(maxlen=10_000)  # frame in hand -> coil
        self.write_latency_ms: deque[float] = deque(maxlen=10_000)  # frame in hand -> written
        self.publish_latency_ms: deque[float] = deque(maxlen=10_000)  # decision -> written
        self.last_written = OutputSignals()
        self._measured_since_s: float | None = None
        self._refreshed_at = float("-inf")
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
        try:
            while not self._stop.is_set():
                if not self.up:
                    if self._connect():
                        backoff_s = self.settings.backoff_first_s
                    else:
                        self._stop.wait(backoff_s)
                        backoff_s = min(backoff_s * 2, self.settings.backoff_max_s)
                        continue
                try:
                    self._exchange()
                except Exception as exc:  # noqa: BLE001 - any I/O failure means link down
                    self._down(exc)
                    continue
                self._wake.wait(self.settings.cycle_s)
                self._wake.clear()
        finally:
            self._final_inhibit()

    def _connect(self) -> bool:
        try:
            self.link.connect()
        except Exception as exc:  # noqa: BLE001
            self._note_error(exc)
            return False
        self.connects += 1
        self._refreshed_at = float("-inf")  # a new connection gets every output at once
        return True

    def _exchange(self) -> None:
        with self._lock:
            outputs, version, published_at = self._outputs, self._version, self._published_at
            since_s = self._since_s
        if time.perf_counter() - published_at > self.settings.stale_outputs_s \
                and outputs.tool_enable:
            outputs = outputs.inhibited()
        now = time.perf_counter()
        wrote = outputs != self.last_written or now - self._refreshed_at >= self.settings.refresh_s
        if wrote:
            self.link.write_outputs(outputs)
            self._refreshed_at = now
            self.last_written = outputs
        if version != self._written_version:
            self._written_version = version
            if wrote and since_s is not None and since_s != self._measured_since_s:
                self._measured_since_s = since_s  # the first write that carries this frame
                done = time.perf_counter()
                coil_at = getattr(self.link, "coil_written_at", None) or done
                self.coil_latency_ms.append((coil_at - since_s) * 1e3)
                self.write_latency_ms.append((done - since_s) * 1e3)
                self.publish_latency_ms.append((done - published_at) * 1e3)
        if not wrote and now - self._read_at < self.settings.cycle_s:
            return  # nothing new went out and the inputs are fresh
        self._read_at = now
        inputs = self.link.read_inputs()
        now_s = self.clock()
        found = self.decoder.decode(inputs, now_s)
        self.last_ok_s = time.perf_counter()
        if not self.up:
            self.up = True
            logger.info("signal link %s up", self.link.name)
            found.insert(0, LinkStatus(t_s=now_s, ok=True))
        with self._lock:
            self._found.extend(found)
            self._acks = (self.decoder.unit_ack, self.decoder.result_ack)

    def _down(self, exc: Exception) -> None:
        self._note_error(exc)
        try:
            self.link.close()
        except Exception:
            logger.debug("closing the broken link failed", exc_info=True)
        if self.up:
            self.up = False
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
        if self.up:
            try:
                with self._lock:
                    outputs = self._outputs.inhibited()
                self.link.write_outputs(outputs)
                self.last_written = outputs
            except Exception as exc:  # noqa: BLE001
                logger.warning("could not write the enable off on stop: %s", exc)
        try:
            self.link.close()
        except Exception:
            logger.debug("closing the link failed", exc_info=True)
        self.up = False
