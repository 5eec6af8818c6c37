"""A small local web server shared by the setup, review and operator screens.

Standard library only (``http.server``). An app is a :class:`Router`: one way to register a
route, ``router.add(METHOD, path, handler, max_body_bytes=...)``, plus one static folder.
Static files are resolved strictly inside their folder (no ``..``, no symlink escapes). Every
request passes the guard of :mod:`stationcheck.web.access` (host, token, origin of writes)
before its body is read, and its body must fit the route's limit. Connections, workers and
timeouts are bounded by :mod:`stationcheck.web.listener`.
"""

from __future__ import annotations

import json
import logging
import mimetypes
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from http import HTTPStatus
from http.server import BaseHTTPRequestHandler
from pathlib import Path
from typing import TYPE_CHECKING, Any
from urllib.parse import parse_qs, unquote, urlencode, urlsplit

from stationcheck.errors import StationcheckError
from stationcheck.pipeline.json_lines import nests_deeper
from stationcheck.web.access import Head, WebError, hide_token

if TYPE_CHECKING:
    from stationcheck.web.listener import WebServer

__all__ = ["MAX_JSON_DEPTH", "Request", "Response", "Router", "WebError", "resolve_static"]

log = logging.getLogger(__name__)

SMALL_BODY_BYTES = 64 * 1024
MAX_JSON_DEPTH = 64


@dataclass(frozen=True)
class Request:
    method: str
    path: str
    query: dict[str, str]
    headers: dict[str, str]
    body: bytes = b""

    def json(self) -> Any:
        """The body as JSON; a WebError 400 when it is not, or nests deeper than
        :data:`MAX_JSON_DEPTH`."""
        try:
            value = json.loads(self.body.decode("utf-8") or "null")
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise WebError(400, f"request body is not JSON: {exc}") from exc
        except RecursionError as exc:
            raise WebError(400, "request body nests too deep") from exc
        if nests_deeper(value, MAX_JSON_DEPTH):
            raise WebError(400, f"request body nests deeper than {MAX_JSON_DEPTH} levels")
        return value

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


@dataclass(frozen=True)
class Route:
    handler: Handler
    max_body_bytes: int


class Router:
    """Routes per method (exact paths, or a prefix for paths ending in ``/*``) plus one static
    folder served at ``/``; ``name`` names the screen (its cookie, its log lines)."""

    def __init__(
        self, static_root: Path | None = None, index: str = "index.html", name: str = "screen"
    ) -> None:
        self.static_root = static_root.resolve() if static_root else None
        self.index = index
        self.name = name
        self._routes: dict[tuple[str, str], Route] = {}
        self._prefix_routes: list[tuple[str, str, Route]] = []

    def add(
        self, method: str, path: str, handler: Handler, *, max_body_bytes: int | None = None
    ) -> None:
        """Route ``METHOD path``. Bodies: none on GET/HEAD, up to ``max_body_bytes``
        (default 64 KiB) otherwise."""
        method = method.upper()
        if max_body_bytes is None:
            max_body_bytes = 0 if method in ("GET", "HEAD") else SMALL_BODY_BYTES
        route = Route(handler, max_body_bytes)
        if path.endswith("/*"):
            self._prefix_routes.append((method, path[:-1], route))
        else:
            self._routes[(method, path)] = route

    def routes(self) -> dict[tuple[str, str], Route]:
        """Every exact-path route by ``(METHOD, path)``."""
        return dict(self._routes)

    def route(self, method: str, path: str) -> Route:
        """The route for a request, the static folder for GET/HEAD; WebError 404/405."""
        found = self._routes.get((method, path))
        if found is None:
            lookup = "GET" if method == "HEAD" else method
            found = self._routes.get((lookup, path))
            for candidate_method, prefix, candidate in self._prefix_routes:
                if found is None and candidate_method == lookup and path.startswith(prefix):
                    found = candidate
        if found is not None:
            return found
        if method in ("GET", "HEAD") and self.static_root is not None:
            return Route(lambda request: self._static(request.path), 0)
        if any(known == path for _, known in self._routes):
            raise WebError(405, f"{method} not allowed on {path}")
        raise WebError(404, f"no such page: {path}")

    def dispatch(self, request: Request) -> Response:
        return self.route(request.method, request.path).handler(request)

    def _static(self, url_path: str) -> Response:
        assert self.static_root is not None
        file = resolve_static(self.static_root, url_path, self.index)
        content_type = mimetypes.guess_type(file.name)[0] or "application/octet-stream"
        if content_type.startswith("text/") or content_type in ("application/javascript",):
            content_type += "; charset=utf-8"
        return Response(200, file.read_bytes(), content_type, {"Cache-Control": "no-cache"})


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


def body_length(headers: Any, limit: int) -> int:
    """The declared body length, checked before anything is read: 400 for a malformed,
    negative or repeated length or a chunked body, 413 above ``limit``."""
    if headers.get("Transfer-Encoding") is not None:
        raise WebError(400, "chunked request bodies are not taken; send Content-Length")
    values = headers.get_all("Content-Length") or []
    if not values:
        return 0
    if len(set(values)) != 1 or not values[0].strip().isdigit() or len(values[0]) > 12:
        raise WebError(400, "Content-Length must be one whole number of bytes")
    length = int(values[0])
    if length > limit:
        raise WebError(
            413, f"request body too large ({length} bytes; this address takes at most {limit})"
        )
    return length


class RequestHandler(BaseHTTPRequestHandler):
    """One request per connection: guard, route, body, answer, close."""

    server: WebServer
    protocol_version = "HTTP/1.1"

    def handle(self) -> None:
        self.close_connection = True
        self.handle_one_request()

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

    def do_PATCH(self) -> None:
        self._handle("PATCH")

    def _handle(self, method: str) -> None:
        cookie: str | None = None
        try:
            split = urlsplit(self.path)
            query = {k: v[-1] for k, v in parse_qs(split.query, keep_blank_values=True).items()}
            headers = {k.lower(): v for k, v in self.headers.items()}
            head = Head(method, split.path, query, headers)
            cookie = self.server.admit(head)
            route = self.server.router.route(method, split.path)
            length = body_length(self.headers, route.max_body_bytes)
            body = self.rfile.read(length) if length else b""
            if len(body) != length:
                raise WebError(400, "the request body ended early")
            self.server.read_done(self.connection)
            if cookie and method == "GET" and not split.path.startswith("/api/"):
                response = Response(
                    303, b"", "text/plain", {"Location": _without_token(split.path, query)}
                )
            else:
                response = route.handler(Request(method, split.path, query, headers, body))
        except WebError as exc:
            if exc.status in (401, 403, 413, 415, 421):
                log.info("refused %s %s: %s", method, hide_token(split.path), exc)
            response = Response.json({"error": str(exc)}, exc.status)
        except StationcheckError as exc:
            response = Response.json({"error": str(exc)}, 400)
        except Exception:  # a bug in a handler must not kill the server thread
            log.exception("unhandled error serving %s %s", method, hide_token(self.path))
            response = Response.json({"error": "internal error (see the server log)"}, 500)
        if cookie:
            response.headers.setdefault("Set-Cookie", cookie)
        self._send(method, response)

    def _send(self, method: str, response: Response) -> None:
        stream = response.stream
        slot = stream is not None and self.server.stream_slot()
        if stream is not None and not slot:
            _close(stream)
            stream, response = (
                None,
                Response.json({"error": "too many open live views; close one and reload"}, 503),
            )
        try:
            self.send_response(response.status)
            self.send_header("Content-Type", response.content_type)
            self.send_header("X-Content-Type-Options", "nosniff")
            self.send_header("Referrer-Policy", "same-origin")
            self.send_header("X-Frame-Options", "DENY")
            self.send_header("Connection", "close")
            for key, value in response.headers.items():
                self.send_header(key, value)
            if stream is not None:
                self.send_header("Cache-Control", "no-cache")
                self.end_headers()
                for chunk in stream:
                    self.wfile.write(chunk)
                    self.wfile.flush()
                return
            self.send_header("Content-Length", str(len(response.body)))
            self.end_headers()
            if method != "HEAD":
                self.wfile.write(response.body)
        except OSError:  # the viewer went away, or stopped reading for the write timeout
            log.debug(
                "viewer went away during %s %s", method, hide_token(getattr(self, "path", ""))
            )
        finally:
            if stream is not None:
                _close(stream)
            if slot:
                self.server.stream_done()

    def send_error(self, code: int, message: str | None = None, explain: str | None = None) -> None:
        """Errors found by the standard library's parsing (request line, headers) answer as
        the routes do: an HTTP/1.1 status line and a one-line JSON error."""
        self.request_version = "HTTP/1.1"
        self.close_connection = True
        text = message or HTTPStatus(code).phrase
        self._send("GET", Response.json({"error": f"bad request: {text}"}, code))

    def log_message(self, format: str, *args: Any) -> None:
        log.debug("%s %s", self.address_string(), hide_token(format % args))


def _close(stream: Iterator[bytes]) -> None:
    close = getattr(stream, "close", None)
    if close is not None:
        close()


def _without_token(path: str, query: dict[str, str]) -> str:
    """The same address without its token, always on this site (never ``//other``)."""
    rest = urlencode({k: v for k, v in query.items() if k != "token"})
    local = "/" + path.lstrip("/\\")
    return f"{local}?{rest}" if rest else local
