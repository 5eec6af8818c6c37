"""Factories for the setup screen's tests: a workspace holding a copy of the demo station, a
running setup server on 127.0.0.1 with a free port, and a small HTTP client."""

from __future__ import annotations

import http.client
import json
import shutil
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace, build_router

REPO = Path(__file__).resolve().parents[3]
DEMO_CONFIG = REPO / "configs" / "demo_station.yaml"
DEMO_VIDEO = REPO / "sample_video" / "demo_station.mp4"
DEMO_INPUTS = REPO / "sample_video" / "demo_station_inputs.jsonl"


@dataclass
class Client:
    server: WebServer
    headers: dict[str, str]

    def call(self, method: str, path: str, body: Any = None) -> tuple[int, Any]:
        host, port = self.server.server_address[:2]
        conn = http.client.HTTPConnection(str(host), int(port), timeout=30)
        try:
            payload = json.dumps(body).encode() if body is not None else None
            headers = dict(self.headers)
            if method != "GET":  # what the screen's own page sends with a write
                headers |= {"Content-Type": "application/json", "X-Stationcheck-Request": "1"}
            conn.request(method, path, body=payload, headers=headers)
            resp = conn.getresponse()
            raw = resp.read()
            kind = resp.getheader("Content-Type") or ""
            return resp.status, json.loads(raw) if kind.startswith("application/json") else raw
        finally:
            conn.close()


@pytest.fixture
def workspace(tmp_path: Path) -> Path:
    """``tmp/configs/demo_station.yaml`` with its reference frame and taught check zone."""
    configs = tmp_path / "configs"
    configs.mkdir()
    shutil.copy(DEMO_CONFIG, configs / DEMO_CONFIG.name)
    shutil.copytree(REPO / "configs" / "demo_station", configs / "demo_station")
    return tmp_path


@pytest.fixture
def with_video(workspace: Path) -> Path:
    """The sample video and its station inputs where the demo config expects them."""
    folder = workspace / "sample_video"
    folder.mkdir()
    shutil.copy(DEMO_VIDEO, folder / DEMO_VIDEO.name)
    shutil.copy(DEMO_INPUTS, folder / DEMO_INPUTS.name)
    return workspace


ServerFactory = Callable[..., Client]


@pytest.fixture
def setup_server(workspace: Path) -> Iterator[ServerFactory]:
    servers: list[WebServer] = []

    def start(config: str | None = "configs/demo_station.yaml", token: str | None = None,
              send_token: bool = True) -> Client:
        path = workspace / config if config is not None else None
        session = SetupSession.open(Workspace(workspace), path)
        server = WebServer(build_router(session), "127.0.0.1", 0, AccessRule(token)).start()
        servers.append(server)
        headers = {"X-Access-Token": token} if token and send_token else {}
        return Client(server, headers)

    yield start
    for server in servers:
        server.close()
