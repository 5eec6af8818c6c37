"""HTTP helpers for the review screen's tests (imported by name: unique across test folders)."""

from __future__ import annotations

import http.client
import json
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from stationcheck.pipeline.replay_report import ReplayReport
from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.review_screen import ReviewSource, build_review_router


@dataclass
class Client:
    server: WebServer

    def get(self, path: str) -> tuple[int, dict[str, str], bytes]:
        host, port = self.server.server_address[:2]
        conn = http.client.HTTPConnection(str(host), int(port), timeout=10)
        try:
            conn.request("GET", path)
            response = conn.getresponse()
            return response.status, {k.lower(): v for k, v in response.getheaders()}, \
                response.read()
        finally:
            conn.close()

    def json(self, path: str, status: int = 200) -> Any:
        got, _, body = self.get(path)
        assert got == status, body
        return json.loads(body)


@dataclass(frozen=True)
class DemoRun:
    log: Path
    report: ReplayReport


def serve(log: Path) -> Iterator[Client]:
    server = WebServer(build_review_router(ReviewSource(log)), "127.0.0.1", 0,
                       AccessRule(None)).start()
    try:
        yield Client(server)
    finally:
        server.close()
