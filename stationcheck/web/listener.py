"""The screens' listening socket with every resource bounded.

- A connection costs a thread only once its request has begun to arrive: until then it waits
  in one selector, and one that stays silent for ``idle_timeout_s`` is closed.
- At most ``max_connections`` are open; a new one beyond that pushes out the longest-idle
  waiting connection (or is closed at once when all are busy), so idle floods cannot lock the
  screen out.
- A bounded pool of daemon workers (started only when all are busy) serves requests, one
  request per connection. Reading a
  request's head and body has ``request_timeout_s`` in all (a trickling sender is cut off);
  every socket write has the same timeout.
- Live views (server-sent events, MJPEG) hold a worker each, at most ``max_streams`` of them;
  the pool has ``workers`` more for ordinary requests.
"""

from __future__ import annotations

import logging
import queue
import selectors
import socket
import threading
import time
from dataclasses import dataclass
from http.server import HTTPServer
from typing import Any

from stationcheck.errors import StationcheckError
from stationcheck.web.access import AccessRule, Head
from stationcheck.web.server import RequestHandler, Router

log = logging.getLogger(__name__)

_TICK_S = 0.05


@dataclass(frozen=True)
class ServerLimits:
    max_connections: int = 256
    workers: int = 8
    max_streams: int = 16
    idle_timeout_s: float = 10.0
    request_timeout_s: float = 10.0


class WebServer(HTTPServer):
    """Serves one :class:`Router` behind an :class:`AccessRule`, within :class:`ServerLimits`."""

    allow_reuse_address = True

    def __init__(
        self,
        router: Router,
        host: str,
        port: int,
        access: AccessRule,
        limits: ServerLimits = ServerLimits(),
    ) -> None:
        self.router = router
        self.access = access
        self.limits = limits
        self._host = host
        self._lock = threading.Lock()
        self._waiting: dict[socket.socket, tuple[Any, float]] = {}
        self._reading: dict[socket.socket, float] = {}
        self._open = 0
        self._streams = threading.BoundedSemaphore(limits.max_streams)
        self._jobs: queue.SimpleQueue[tuple[socket.socket, Any] | None] = queue.SimpleQueue()
        self._stop = threading.Event()
        self._stopped = threading.Event()
        self._thread: threading.Thread | None = None
        self._workers: list[threading.Thread] = []
        try:
            super().__init__((host, port), RequestHandler)
        except OSError as exc:
            raise StationcheckError(
                f"cannot listen on {host}:{port}: {exc.strerror or exc}"
            ) from exc
        self._idle_workers = 0

    @property
    def url(self) -> str:
        host, port = self.server_address[:2]
        shown = host if isinstance(host, str) else host.decode()
        if ":" in shown:
            shown = f"[{shown}]"
        return f"http://{shown}:{port}/"

    @property
    def cookie_name(self) -> str:
        return f"stationcheck_{self.router.name}_{self.server_address[1]}"

    def admit(self, head: Head) -> str | None:
        return self.access.admit(head, self._host, self.cookie_name)

    def stream_slot(self) -> bool:
        return self._streams.acquire(blocking=False)

    def stream_done(self) -> None:
        self._streams.release()

    def read_done(self, connection: socket.socket) -> None:
        """The request is in: its reading deadline no longer applies."""
        with self._lock:
            self._reading.pop(connection, None)

    def start(self) -> WebServer:
        """Serve in a background thread (for tests and for screens beside a live loop)."""
        self._thread = threading.Thread(
            target=self.serve_forever, name=f"web-{self.router.name}", daemon=True
        )
        self._thread.start()
        return self

    def serve_forever(self, poll_interval: float = _TICK_S) -> None:
        selector = selectors.DefaultSelector()
        selector.register(self.socket, selectors.EVENT_READ)
        try:
            while not self._stop.is_set():
                for key, _ in selector.select(poll_interval):
                    if key.fileobj is self.socket:
                        self._accept(selector)
                    else:
                        self._begin(selector, key.fileobj)  # type: ignore[arg-type]
                self._sweep(selector)
        finally:
            selector.close()
            self._stopped.set()

    def _accept(self, selector: selectors.BaseSelector) -> None:
        try:
            connection, address = self.socket.accept()
        except OSError:
            return
        with self._lock:
            if self._open >= self.limits.max_connections:
                oldest = min(self._waiting, key=lambda s: self._waiting[s][1], default=None)
                if oldest is None:
                    _shut(connection)
                    return
                selector.unregister(oldest)
                del self._waiting[oldest]
                self._open -= 1
                _shut(oldest)
            self._open += 1
            self._waiting[connection] = (address, time.monotonic())
        selector.register(connection, selectors.EVENT_READ)

    def _begin(self, selector: selectors.BaseSelector, connection: socket.socket) -> None:
        selector.unregister(connection)
        with self._lock:
            address, _ = self._waiting.pop(connection)
            self._reading[connection] = time.monotonic() + self.limits.request_timeout_s
            grow = False
            if self._idle_workers > 0:  # an idle worker takes it
                self._idle_workers -= 1
            elif len(self._workers) < self.limits.workers + self.limits.max_streams:
                grow = True  # a worker only when all are busy: a quiet screen keeps few
                worker = threading.Thread(
                    target=self._work,
                    daemon=True,
                    name=f"web-{self.router.name}-{len(self._workers)}",
                )
                self._workers.append(worker)
        if grow:
            worker.start()
        self._jobs.put((connection, address))

    def _sweep(self, selector: selectors.BaseSelector) -> None:
        now = time.monotonic()
        with self._lock:
            idle = [
                s
                for s, (_, since) in self._waiting.items()
                if now - since > self.limits.idle_timeout_s
            ]
            for connection in idle:
                selector.unregister(connection)
                del self._waiting[connection]
                self._open -= 1
                _shut(connection)
            for connection, deadline in list(self._reading.items()):
                if now > deadline:
                    del self._reading[connection]
                    try:  # the worker's read fails at once and the worker moves on
                        connection.shutdown(socket.SHUT_RDWR)
                    except OSError:
                        pass

    def _work(self) -> None:
        while True:
            job = self._jobs.get()
            if job is None:
                return
            connection, address = job
            try:
                connection.settimeout(self.limits.request_timeout_s)
                self.finish_request(connection, address)
            except Exception:  # a broken connection must not end the worker
                log.debug("connection from %s ended badly", address, exc_info=True)
            finally:
                with self._lock:
                    self._reading.pop(connection, None)
                    self._open -= 1
                    self._idle_workers += 1
                _shut(connection)

    def shutdown(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._stopped.wait(5)

    def server_close(self) -> None:
        super().server_close()
        with self._lock:
            for connection in self._waiting:
                _shut(connection)
            self._waiting.clear()
        for _ in self._workers:
            self._jobs.put(None)

    def wait(self) -> None:
        """Block until the serving thread ends (Ctrl-C raises KeyboardInterrupt here)."""
        if self._thread is not None:
            while self._thread.is_alive():
                self._thread.join(0.5)

    def close(self) -> None:
        self.shutdown()
        self.server_close()
        if self._thread is not None:
            self._thread.join(timeout=5)


def _shut(connection: socket.socket) -> None:
    try:
        connection.shutdown(socket.SHUT_RDWR)
    except OSError:
        pass
    connection.close()
