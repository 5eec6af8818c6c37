"""Real Chromium against the three screens: a page served from another local port tries a form
post and a ``fetch`` to every write address of every screen; each is refused before its
handler runs and the config on disk stays as it was. A host name that is not this PC's (DNS
rebinding, simulated with Chromium's host-resolver rules) is refused too.

What the browser does is Chromium's own (CORS pre-flight for a custom header or a JSON body,
``Origin`` on every cross-origin POST, HTML forms limited to three content types, per the
Fetch and HTML standards); the screens must hold without any help from it beyond that.
"""

from __future__ import annotations

import http.server
import json
import logging
import shutil
import threading
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest

from stationcheck.config import load_config
from stationcheck.store.sqlite_log import SqliteStepLog
from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.operator.feed import OperatorFeed
from stationcheck.web.operator.operator_routes import operator_router
from stationcheck.web.review_screen import ReviewSource, build_review_router
from stationcheck.web.server import Request, Response, Router
from stationcheck.web.setup import SetupSession, Workspace, build_router
from tests.conftest import CHROMIUM_ARGS, chromium_path

REPO = Path(__file__).resolve().parents[2]
CONFIG = REPO / "configs" / "demo_station.yaml"
TOKEN = "a-token-for-the-test-123"


@dataclass
class Screen:
    name: str
    server: WebServer
    writes: list[str]
    called: list[str] = field(default_factory=list)

    @property
    def origin(self) -> str:
        return self.server.url.rstrip("/")


def spied(router: Router, called: list[str]) -> tuple[Router, list[str]]:
    """The router with every write handler recording that it ran."""
    writes = []
    for (method, path), route in router.routes().items():
        if method == "GET":
            continue
        writes.append(path)

        def record(request: Request, handler: Callable[[Request], Response] = route.handler,
                   path: str = path) -> Response:
            called.append(path)
            return handler(request)

        router.add(method, path, record, max_body_bytes=route.max_body_bytes)
    return router, writes


@pytest.fixture
def screens(tmp_path: Path) -> Iterator[list[Screen]]:
    shutil.copy(CONFIG, tmp_path / "station.yaml")
    shutil.copytree(REPO / "configs" / "demo_station", tmp_path / "demo_station")
    made: list[Screen] = []
    feed = OperatorFeed(load_config(CONFIG).to_plan(), mode="live")
    session = SetupSession.open(Workspace(tmp_path), tmp_path / "station.yaml")
    SqliteStepLog(tmp_path / "log.sqlite").close()
    for name, router, token in (
        ("setup", build_router(session), None),
        ("setup-with-token", build_router(session), TOKEN),
        ("operator", operator_router(feed), None),
        ("review", build_review_router(ReviewSource(tmp_path / "log.sqlite")), None),
    ):
        called: list[str] = []
        router, writes = spied(router, called)
        if name == "review":  # read-only: no write address; posts to its reads are refused
            assert writes == []
            writes = ["/api/units", "/api/export/units.csv"]
        server = WebServer(router, "127.0.0.1", 0, AccessRule(token)).start()
        made.append(Screen(name, server, writes, called))
    try:
        yield made
    finally:
        for screen in made:
            screen.server.close()
        feed.close()


ATTACK_PAGE = """<!doctype html><html><body>
<script>
const targets = %s;
const body = JSON.stringify({data: {format_version: 1, thresholds: {dwell_ms: 0}},
                             serial: "X", step: "s", path: "station.yaml"});
async function attack() {
  const tries = [];
  let n = 0;
  for (const url of targets) {
    // an HTML form post (the classic cross-site request forgery), into its own frame
    const frame = document.createElement("iframe");
    frame.name = "f" + n;
    document.body.appendChild(frame);
    const loaded = new Promise((done) => frame.addEventListener("load", done));
    const form = document.createElement("form");
    form.method = "POST"; form.action = url; form.target = frame.name;
    form.enctype = "text/plain";
    const field = document.createElement("input");
    field.name = body.slice(0, -1) + ',"x":"'; field.value = '"}';
    form.appendChild(field);
    document.body.appendChild(form);
    form.submit();
    tries.push(loaded);
    // fetch as simple requests (no pre-flight) and as the page's own would (pre-flight)
    tries.push(fetch(url, {method: "POST", mode: "no-cors", credentials: "include",
                           headers: {"Content-Type": "text/plain"}, body}).catch(() => null));
    tries.push(fetch(url, {method: "POST", credentials: "include",
                           headers: {"Content-Type": "application/json",
                                     "X-Stationcheck-Request": "1"}, body})
               .then(() => "read").catch(() => "blocked"));
    n += 1;
  }
  const results = await Promise.all(tries);
  document.title = "done " + results.filter((r) => r === "read").length;
}
attack();
</script></body></html>"""


def serve_attack_page(targets: list[str]) -> http.server.ThreadingHTTPServer:
    page = (ATTACK_PAGE % json.dumps(targets)).encode()

    class Page(http.server.BaseHTTPRequestHandler):
        def do_GET(self) -> None:
            self.send_response(200)
            self.send_header("Content-Type", "text/html")
            self.send_header("Content-Length", str(len(page)))
            self.end_headers()
            self.wfile.write(page)

        def log_message(self, format: str, *args: Any) -> None:
            pass

    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), Page)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    return server


def test_another_local_site_cannot_write_to_any_screen(
        screens: list[Screen], page: Any, tmp_path: Path,
        caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.INFO, logger="stationcheck.web")
    config = tmp_path / "station.yaml"
    before = config.read_bytes()
    tokened = next(s for s in screens if s.name == "setup-with-token")
    # the engineer has the token-protected screen open: its cookie is in this browser
    answer = page.goto(f"{tokened.server.url}?token={TOKEN}")
    assert answer is not None and answer.ok
    assert "token" not in page.url  # taken out of the address bar after load
    cookies = page.context.cookies()
    assert [(c["name"], c["httpOnly"], c["sameSite"]) for c in cookies] == [
        (tokened.server.cookie_name, True, "Strict")]
    targets = [f"{s.origin}{path}" for s in screens for path in s.writes]
    # setup's thirteen writes (five are the Label tab's) twice, the ack, two reviews
    assert len(targets) == 2 * 13 + 1 + 2
    attacker = serve_attack_page(targets)
    try:
        page.goto(f"http://127.0.0.1:{attacker.server_address[1]}/")
        page.wait_for_function("document.title.startsWith('done')", timeout=30_000)
        assert page.title() == "done 0"  # no answer was readable by the other site
    finally:
        attacker.shutdown()
        attacker.server_close()
    assert {s.name: s.called for s in screens} == {s.name: [] for s in screens}
    assert config.read_bytes() == before
    refused = [r.getMessage() for r in caplog.records if r.getMessage().startswith("refused")]
    for target in targets:  # the form and the simple fetch arrived, and were turned away
        path = target.split("/", 3)[3]
        assert sum(f"POST /{path}:" in line for line in refused) >= 2, (target, refused)


def test_the_screens_own_page_still_writes(screens: list[Screen], page: Any) -> None:
    """The guard lets the page itself through: its check request reaches the handler."""
    setup = screens[0]
    page.goto(setup.server.url)
    page.wait_for_load_state("load")
    status = page.evaluate("""async () => (await fetch('/api/check', {method: 'POST',
        headers: {'Content-Type': 'application/json', 'X-Stationcheck-Request': '1'},
        body: JSON.stringify({data: {format_version: 1}})})).status""")
    assert status == 200
    assert setup.called == ["/api/check"]


def test_a_foreign_host_name_is_refused(screens: list[Screen], browser: Any) -> None:
    """DNS rebinding: a name that resolves to this PC but is not one of its names."""
    port = screens[0].server.server_address[1]
    rebinding = browser.browser_type.launch(executable_path=chromium_path(), args=[
        *CHROMIUM_ARGS, "--host-resolver-rules=MAP rebound.example 127.0.0.1"])
    try:
        tab = rebinding.new_page()
        answer = tab.goto(f"http://rebound.example:{port}/api/state")
        assert answer is not None and answer.status == 421
        assert "does not answer to the host name 'rebound.example'" in tab.content()
        answer = tab.goto(f"http://localhost:{port}/api/state")
        assert answer is not None and answer.status == 200
    finally:
        rebinding.close()
