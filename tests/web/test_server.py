"""The shared web server: routing, static files kept inside their folder, access tokens."""

from __future__ import annotations

import http.client
import json
import logging
import os
from collections.abc import Iterator
from pathlib import Path

import pytest

from stationcheck.web.access import AccessRule, is_loopback
from stationcheck.web.listener import WebServer
from stationcheck.web.server import Request, Response, Router, WebError, resolve_static


@pytest.fixture
def site(tmp_path: Path) -> Path:
    root = tmp_path / "site"
    root.mkdir()
    (root / "index.html").write_text("<h1>home</h1>")
    (root / "app.js").write_text("let x = 1;")
    (tmp_path / "secret.txt").write_text("outside")
    os.symlink(tmp_path / "secret.txt", root / "link.txt")
    return root


def serve(site: Path, token: str | None = None) -> WebServer:
    router = Router(site)
    router.add("GET", "/api/echo", lambda r: Response.json({"q": r.query}))
    router.add("POST", "/api/echo", lambda r: Response.json(r.json()))

    def boom(request: Request) -> Response:
        raise RuntimeError("bug")

    router.add("GET", "/api/boom", boom)
    return WebServer(router, "127.0.0.1", 0, AccessRule(token)).start()


@pytest.fixture
def server(site: Path) -> Iterator[WebServer]:
    srv = serve(site)
    yield srv
    srv.close()


WRITE = {"Content-Type": "application/json", "X-Stationcheck-Request": "1"}


def fetch(srv: WebServer, method: str, path: str, body: bytes | None = None,
          headers: dict[str, str] | None = None) -> tuple[int, bytes, dict[str, str]]:
    host, port = srv.server_address[:2]
    conn = http.client.HTTPConnection(str(host), int(port), timeout=5)
    try:
        conn.request(method, path, body=body, headers=headers or {})
        resp = conn.getresponse()
        return resp.status, resp.read(), dict(resp.getheaders())
    finally:
        conn.close()


@pytest.mark.parametrize(("path", "status", "needle"), [
    ("/", 200, b"home"),
    ("/index.html", 200, b"home"),
    ("/app.js", 200, b"let x"),
    ("/missing.js", 404, b"no such page"),
    ("/../secret.txt", 403, b"outside the app"),
    ("/%2e%2e/secret.txt", 403, b"outside the app"),
    ("/static/%2e%2e/%2e%2e/secret.txt", 403, b"outside the app"),
    ("/..%5csecret.txt", 403, b"outside the app"),
    ("/link.txt", 403, b"outside the app"),
    ("/app.js%00.png", 403, b"outside the app"),
])
def test_static_files_stay_inside_their_folder(server: WebServer, path: str, status: int,
                                              needle: bytes) -> None:
    code, body, _ = fetch(server, "GET", path)
    assert code == status
    assert needle in body
    assert b"outside\n" not in body and body != b"outside"


def test_json_routes_and_errors(server: WebServer) -> None:
    code, body, _ = fetch(server, "GET", "/api/echo?a=1&b=two")
    assert (code, json.loads(body)) == (200, {"q": {"a": "1", "b": "two"}})
    code, body, _ = fetch(server, "POST", "/api/echo", b'{"x": [1, 2]}', WRITE)
    assert (code, json.loads(body)) == (200, {"x": [1, 2]})
    code, body, _ = fetch(server, "POST", "/api/echo", b"{not json", WRITE)
    assert code == 400 and b"not JSON" in body
    code, body, _ = fetch(server, "GET", "/api/boom")
    assert code == 500 and b"internal error" in body
    code, _, _ = fetch(server, "DELETE", "/api/echo", None, WRITE)
    assert code == 405  # a known path, a method it does not take


@pytest.mark.parametrize(("headers", "path", "status"), [
    ({}, "/", 401),
    ({}, "/?token=wrong-token-xyz", 401),
    ({"X-Access-Token": "wrong-token-xyz"}, "/api/echo", 401),
    ({}, "/?token=correct-token-123", 303),
    ({"X-Access-Token": "correct-token-123"}, "/api/echo", 200),
    ({"Cookie": "other=1; stationcheck_screen_PORT=correct-token-123"}, "/api/echo", 200),
    ({"Cookie": "stationcheck_screen_PORT=nope"}, "/api/echo", 401),
    ({"Cookie": "stationcheck_screen_1=correct-token-123"}, "/api/echo", 401),
])
def test_token_required_when_set(site: Path, headers: dict[str, str], path: str,
                                 status: int) -> None:
    srv = serve(site, token="correct-token-123")
    try:
        port = str(srv.server_address[1])
        headers = {k: v.replace("PORT", port) for k, v in headers.items()}
        code, body, got = fetch(srv, "GET", path, headers=headers)
        assert code == status
        if status == 401:
            assert b"home" not in body and b"access token" in body
        if "token=correct" in path:  # the page goes on without the token in its address
            assert got["Set-Cookie"] == (f"stationcheck_screen_{port}=correct-token-123; "
                                         "Path=/; HttpOnly; SameSite=Strict")
            assert got["Location"] == "/"
    finally:
        srv.close()


@pytest.mark.parametrize(("host", "token", "needs_token"), [
    ("127.0.0.1", None, False),
    ("localhost", None, False),
    ("::1", None, False),
    ("0.0.0.0", None, True),
    ("192.168.10.5", None, True),
    ("127.0.0.1", "given-token-abc", True),
])
def test_token_is_mandatory_beyond_loopback(host: str, token: str | None,
                                            needs_token: bool) -> None:
    rule = AccessRule.for_host(host, token)
    assert (rule.token is not None) == needs_token
    assert is_loopback(host) == (host in ("127.0.0.1", "localhost", "::1"))


def test_short_token_is_refused() -> None:
    with pytest.raises(Exception, match="12 characters"):
        AccessRule.for_host("0.0.0.0", "short")


def test_resolve_static_direct(site: Path) -> None:
    assert resolve_static(site, "/app.js") == (site / "app.js").resolve()
    with pytest.raises(WebError) as err:
        resolve_static(site, "/sub/../../secret.txt")
    assert err.value.status == 403


def test_port_in_use_is_one_line_error(server: WebServer, site: Path) -> None:
    port = int(server.server_address[1])
    with pytest.raises(Exception, match=f"cannot listen on 127.0.0.1:{port}"):
        WebServer(Router(site), "127.0.0.1", port, AccessRule(None))


def test_idle_crowds_and_tricklers_cannot_lock_the_screen_out(site: Path) -> None:
    """Limits: a new connection pushes out the longest-idle one at the cap; silent ones close
    after the idle timeout; a request trickled in is cut off at the request timeout."""
    import socket
    import time

    from stationcheck.web.listener import ServerLimits

    limits = ServerLimits(max_connections=4, workers=2, max_streams=1, idle_timeout_s=0.5,
                          request_timeout_s=0.5)
    srv = WebServer(Router(site), "127.0.0.1", 0, AccessRule(None), limits).start()
    address = srv.server_address[:2]
    try:
        crowd = [socket.create_connection(address, timeout=5) for _ in range(10)]
        code, body, _ = fetch(srv, "GET", "/")
        assert (code, body) == (200, b"<h1>home</h1>")
        start = time.monotonic()
        for sock in crowd:  # every idle one is closed: pushed out or timed out
            assert sock.recv(1) == b""
            sock.close()
        assert time.monotonic() - start < 3.0
        trickle = socket.create_connection(address, timeout=5)
        trickle.sendall(b"GET / HTTP/1.1\r\n")  # the request has begun; the rest never comes
        assert trickle.recv(1024) == b""  # cut off, no answer
        trickle.close()
        assert fetch(srv, "GET", "/")[0] == 200
    finally:
        srv.close()


@pytest.mark.parametrize(("bound", "names", "host", "allowed"), [
    ("127.0.0.1", (), "127.0.0.1:8371", True),
    ("127.0.0.1", (), "localhost:8371", True),
    ("127.0.0.1", (), "[::1]:8371", True),
    ("127.0.0.1", (), "attacker.example:8371", False),  # DNS rebinding
    ("127.0.0.1", (), "192.168.1.5:8371", False),
    ("0.0.0.0", (), "192.168.1.5:8371", True),
    ("0.0.0.0", (), "attacker.example:8371", False),
    ("0.0.0.0", ("station-7.plant.example",), "Station-7.plant.example.:8371", True),
    ("192.168.1.5", (), "192.168.1.5", True),
    ("192.168.1.5", (), "192.168.1.6", False),
])
def test_host_allow_list(bound: str, names: tuple[str, ...], host: str, allowed: bool) -> None:
    from stationcheck.web.access import Head

    rule = AccessRule.for_host(bound, "a-long-enough-token", names)
    head = Head("GET", "/", {"token": "a-long-enough-token"}, {"host": host})
    if allowed:
        rule.admit(head, bound, "cookie")
    else:
        with pytest.raises(WebError) as refused:
            rule.admit(head, bound, "cookie")
        assert refused.value.status == 421


def test_tokens_never_reach_the_log(site: Path, caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.DEBUG, logger="stationcheck.web")
    srv = serve(site, token="correct-token-123")
    try:
        for path in ("/?token=correct-token-123", "/?token=wrong-token-456", "/api/boom"):
            fetch(srv, "GET", path, headers={"X-Access-Token": "correct-token-123"}
                  if path == "/api/boom" else {})
    finally:
        srv.close()
    logged = "\n".join(r.getMessage() for r in caplog.records)
    assert "token=(hidden)" in logged
    assert "correct-token-123" not in logged and "wrong-token-456" not in logged
