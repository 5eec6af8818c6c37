"""A small local web server shared by the setup, review and operator screens.

Standard library only (``http.server``), threaded so a slow viewer never holds up another.
An app is a :class:`Router`: exact-path JSON/bytes handlers plus one static folder. Static
files are resolved strictly inside their folder (no ``..``, no symlink escapes). When the
server is bound beyond loopback an access token is required on every request (see
:mod:`stationcheck.web.access`).
"""

from __future__ import annotations

import json
import logging
import mimetypes
import threading
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, unquote, urlsplit

from stationcheck.errors import StationcheckError
from stationcheck.web.access import AccessRule

log = logging.getLogger(__name__)

MAX_BODY_BYTES = 32 * 1024 * 1024


class WebError(StationcheckError):
    """A web request cannot be served (bad body, unknown path, refused); carries its status."""

    exit_code = 1

    def __init__(self, status: int, message: str) -> None:
        super().__init__(message)
        self.status = status


@dataclass(frozen=True)
class Request:
    method: str
    path: str
    query: dict[str, str]
    headers: dict[str, str]
    body: bytes = b""

    def json(self) -> Any:
        """The body as JSON; a WebError 400 when it is not."""
        try:
            return json.loads(self.body.decode("utf-8") or "null")
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise WebError(400, f"request body is not JSON: {exc}") from exc

    def int_arg(self, name: str, default: int, lo: int, hi: int) -> int:
        """A query argument as an int clamped to ``[lo, hi]``; 400 when not a number."""
        raw = self.query.get(name)
        if raw is None or raw == "":
            return default
        try:
            value = int(raw)
        except ValueError as exc:
            raise WebError(400, f"{name} must be a whole number, got {raw!r}") from exc
        return max(lo, min(hi, value))


@dataclass
class Response:
    status: int = 200
    body: bytes = b""
    content_type: str = "application/json"
    headers: dict[str, str] = field(default_factory=dict)
    stream: Iterator[bytes] | None = None

    @classmethod
    def json(cls, data: Any, status: int = 200) -> Response:
        return cls(status, json.dumps(data, separators=(",", ":")).encode("utf-8"))


Handler = Callable[[Request], Response]


class Router:
    """Exact-path handlers per method plus one static folder served at ``/``."""

    def __init__(self, static_root: Path | None = None, index: str = "index.html") -> None:
        self.static_root = static_root.resolve() if static_root else None
        self.index = index
        self._routes: dict[tuple[str, str], Handler] = {}
        self._prefix_routes: list[tuple[str, str, Handler]] = []

    def add(self, method: str, path: str, handler: Handler) -> None:
        """Route ``METHOD path``; a path ending in ``/*`` matches anything below it."""
        if path.endswith("/*"):
            self._prefix_routes.append((method.upper(), path[:-1], handler))
        else:
            self._routes[(method.upper(), path)] = handler

    def get(self, path: str) -> Callable[[Handler], Handler]:
        return self._decorator("GET", path)

    def _decorator(self, method: str, path: str) -> Callable[[Handler], Handler]:
        def wrap(handler: Handler) -> Handler:
            self.add(method, path, handler)
            return handler
        return wrap

    def dispatch(self, request: Request) -> Response:
        handler = self._routes.get((request.method, request.path))
        if handler is None:
            for method, prefix, candidate in self._prefix_routes:
                if method == request.method and request.path.startswith(prefix):
                    handler = candidate
                    break
        if handler is not None:
            return handler(request)
        if request.method in ("GET", "HEAD") and self.static_root is not None:
            return self._static(request.path)
        if any(path == request.path for _, path in self._routes):
            raise WebError(405, f"{request.method} not allowed on {request.path}")
        raise WebError(404, f"no such page: {request.path}")

    def _static(self, url_path: str) -> Response:
        assert self.static_root is not None
        file = resolve_static(self.static_root, url_path, self.index)
        content_type = mimetypes.guess_type(file.name)[0] or "application/octet-stream"
        if content_type.startswith("text/") or content_type in ("application/javascript",):
            content_type += "; charset=utf-8"
        return Response(200, file.read_bytes(), content_type,
                        {"Cache-Control": "no-cache"})


def resolve_static(root: Path, url_path: str, index: str = "index.html") -> Path:
    """The file under ``root`` that ``url_path`` names; WebError 404/403 otherwise.

    Decodes percent-escapes once, rejects ``..`` parts, backslashes and NUL, and checks that
    the resolved path (symlinks followed) is still inside ``root``.
    """
    decoded = unquote(url_path)
    if "\x00" in decoded or "\\" in decoded:
        raise WebError(403, "refused: path outside the app's folder")
    parts = [p for p in decoded.split("/") if p not in ("", ".")]
    if any(p == ".." for p in parts):
        raise WebError(403, "refused: path outside the app's folder")
    candidate = root.joinpath(*parts) if parts else root
    if candidate.is_dir():
        candidate = candidate / index
    resolved = candidate.resolve()
    if not resolved.is_relative_to(root):
        raise WebError(403, "refused: path outside the app's folder")
    if not resolved.is_file():
        raise WebError(404, f"no such page: {url_path}")
    return resolved


class _RequestHandler(BaseHTTPRequestHandler):
    server: WebServer
    protocol_version = "HTTP/1.1"

    def do_GET(self) -> None:
        self._handle("GET")

    def do_HEAD(self) -> None:
        self._handle("HEAD")

    def do_POST(self) -> None:
        self._handle("POST")

    def do_PUT(self) -> None:
        self._handle("PUT")

    def do_DELETE(self) -> None:
        self._handle("DELETE")

    def _handle(self, method: str) -> None:
        try:
            request = self._read_request(method)
            token_cookie = self.server.access.check(request)
            response = self.server.router.dispatch(request)
            if token_cookie:
                response.headers.setdefault("Set-Cookie", token_cookie)
        except WebError as exc:
            response = Response.json({"error": str(exc)}, exc.status)
        except StationcheckError as exc:
            response = Response.json({"error": str(exc)}, 400)
        except Exception:  # a bug in a handler must not kill the server thread
            log.exception("unhandled error serving %s %s", method, self.path)
            response = Response.json({"error": "internal error (see the server log)"}, 500)
        self._send(method, response)

    def _read_request(self, method: str) -> Request:
        split = urlsplit(self.path)
        query = {k: v[-1] for k, v in parse_qs(split.query, keep_blank_values=True).items()}
        length = int(self.headers.get("Content-Length") or 0)
        if length > MAX_BODY_BYTES:
            raise WebError(413, f"request body too large ({length} bytes)")
        body = self.rfile.read(length) if length else b""
        headers = {k.lower(): v for k, v in self.headers.items()}
        return Request(method, split.path, query, headers, body)

    def _send(self, method: str, response: Response) -> None:
        try:
            self.send_response(response.status)
            self.send_header("Content-Type", response.content_type)
            self.send_header("X-Content-Type-Options", "nosniff")
            for key, value in response.headers.items():
                self.send_header(key, value)
            if response.stream is not None:
                self.send_header("Cache-Control", "no-cache")
                self.send_header("Connection", "close")
                self.end_headers()
                self.close_connection = True
                for chunk in response.stream:
                    self.wfile.write(chunk)
                    self.wfile.flush()
                return
            self.send_header("Content-Length", str(len(response.body)))
            self.end_headers()
            if method != "HEAD":
                self.wfile.write(response.body)
        except (BrokenPipeError, ConnectionResetError):
            log.debug("viewer went away during %s %s", method, self.path)
        finally:
            if response.stream is not None and hasattr(response.stream, "close"):
                response.stream.close()

    def log_message(self, format: str, *args: Any) -> None:
        log.debug("%s " + format, self.address_string(), *args)


class WebServer(ThreadingHTTPServer):
    """A threaded HTTP server for one :class:`Router`; daemon threads, reusable address."""

    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, router: Router, host: str, port: int, access: AccessRule) -> None:
        self.router = router
        self.access = access
        try:
            super().__init__((host, port), _RequestHandler)
        except OSError as exc:
            raise StationcheckError(
                f"cannot listen on {host}:{port}: {exc.strerror or exc}") from exc
        self._thread: threading.Thread | None = None

    @property
    def url(self) -> str:
        host, port = self.server_address[:2]
        shown = host if isinstance(host, str) else host.decode()
        if ":" in shown:
            shown = f"[{shown}]"
        return f"http://{shown}:{port}/"

    def start(self) -> WebServer:
        """Serve in a background thread (for tests and for screens beside a live loop)."""
        self._thread = threading.Thread(target=self.serve_forever, args=(0.05,), name="web",
                                        daemon=True)
        self._thread.start()
        return self

    def wait(self) -> None:
        """Block until the serving thread ends (Ctrl-C raises KeyboardInterrupt here)."""
        if self._thread is not None:
            self._thread.join()

    def close(self) -> None:
        self.shutdown()
        self.server_close()
        if self._thread is not None:
            self._thread.join(timeout=5)
