"""Hostile PLCs: the link never storms a PLC's few connection slots.

Each server below counts the TCP connections it accepts and how many are open at once. Kinds of
failure: a server that answers every request with an exception response (function code + 0x80,
exception code 0x04 "server device failure": Modbus Application Protocol V1.1b3, section 7), one
that never answers (the client's timeout), one that closes every connection at once, and a port
where nothing listens (refused; counted as the worker's attempts). Frames are MBAP header (7
bytes: transaction id, protocol id 0, length, unit id; Modbus Messaging on TCP/IP Implementation
Guide V1.0b, 3.1.3) plus PDU.

Time is compressed: the worker's back-off settings are the defaults divided by 10 and the run
lasts 1 s, which is the default settings' 10 s. The limit: at most 20 new connections in that
time (2 per second worst case, one at a time).
"""

from __future__ import annotations

import socket
import struct
import threading
import time
from collections.abc import Iterator
from dataclasses import replace

import pytest

from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from tests.plc.conftest import free_port

SCALE = 10.0  # default back-off times / SCALE, run for 10 s / SCALE
DEFAULTS = WorkerSettings()


class HostileServer:
    def __init__(self, kind: str) -> None:
        self.kind = kind
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self.sock.bind(("127.0.0.1", 0))
        self.sock.listen(16)
        self.sock.settimeout(0.05)
        self.port = int(self.sock.getsockname()[1])
        self.accepted = 0
        self.open = 0
        self.most_open = 0
        self.requests = 0
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._accept, daemon=True)
        self._thread.start()

    def _accept(self) -> None:
        while not self._stop.is_set():
            try:
                conn, _ = self.sock.accept()
            except (TimeoutError, OSError):
                continue
            with self._lock:
                self.accepted += 1
                self.open += 1
                self.most_open = max(self.most_open, self.open)
            threading.Thread(target=self._serve, args=(conn,), daemon=True).start()

    def _serve(self, conn: socket.socket) -> None:
        conn.settimeout(0.05)
        try:
            while not self._stop.is_set() and self.kind != "closes":
                try:
                    header = conn.recv(7)
                except TimeoutError:
                    continue
                if len(header) < 7:
                    break  # the client closed
                tid, _, length, unit = struct.unpack(">HHHB", header)
                pdu = conn.recv(length - 1)
                self.requests += 1
                if self.kind == "exception":
                    conn.sendall(struct.pack(">HHHBBB", tid, 0, 3, unit, pdu[0] | 0x80, 0x04))
        except OSError:
            pass
        finally:
            conn.close()
            with self._lock:
                self.open -= 1

    def stop(self) -> None:
        self._stop.set()
        self._thread.join(2.0)
        self.sock.close()


@pytest.fixture
def servers() -> Iterator[dict[str, HostileServer]]:
    made = {kind: HostileServer(kind) for kind in ("exception", "silent", "closes")}
    try:
        yield made
    finally:
        for server in made.values():
            server.stop()


def test_hostile_servers_get_at_most_2_connections_per_second(
        servers: dict[str, HostileServer]) -> None:
    settings = replace(DEFAULTS, backoff_first_s=DEFAULTS.backoff_first_s / SCALE,
                       backoff_max_s=DEFAULTS.backoff_max_s / SCALE,
                       healthy_s=DEFAULTS.healthy_s / SCALE, liveness_timeout_s=0.5)
    ports = {kind: server.port for kind, server in servers.items()} | {"refused": free_port()}
    workers = {kind: LinkWorker(ModbusClientLink("127.0.0.1", port, timeout_ms=20.0),
                                settings=settings, seed=1)
               for kind, port in ports.items()}
    for worker in workers.values():
        worker.start()
    time.sleep(10.0 / SCALE)  # the measurement window itself, not a wait for a condition
    for worker in workers.values():
        worker.stop()
    counts = {kind: server.accepted for kind, server in servers.items()}
    counts["refused"] = workers["refused"].attempts
    for kind, count in counts.items():
        assert 3 <= count <= 20, (kind, counts)  # it retries, and never storms
        assert workers[kind].up is False
    assert all(server.most_open == 1 for server in servers.values())  # one at a time
    assert servers["exception"].requests >= counts["exception"]  # they were answered
