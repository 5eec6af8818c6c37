"""Who may use a screen, checked on every request before its body is read.

- **Host allow-list** (against DNS rebinding): the Host header must name this PC as the screen
  was started for it: localhost names, the bound address, the names given with
  ``--allow-host``; a screen bound to every interface (``0.0.0.0``) also takes any IP address
  and this PC's own name.
- **Token**: open on loopback; any other bind address needs the access token, as ``?token=``
  once (the page then lives on a cookie named per screen and port, ``HttpOnly`` and
  ``SameSite=Strict``) or as the ``X-Access-Token`` header for scripts. Constant-time compare.
- **Writes** (every method but GET and HEAD): the Origin (or, without one, the Referer) must be
  the screen's own, the ``X-Stationcheck-Request`` header must be there (a page of another
  site cannot send it without a CORS pre-flight, which the screens never grant), and the body
  must be ``application/json`` (which a plain HTML form cannot send).
"""

from __future__ import annotations

import hmac
import ipaddress
import re
import secrets
import socket
from collections.abc import Mapping
from dataclasses import dataclass
from urllib.parse import urlsplit

from stationcheck.errors import StationcheckError

HEADER_NAME = "x-access-token"
WRITE_HEADER = "X-Stationcheck-Request"
SAFE_METHODS = ("GET", "HEAD")
_TOKEN_IN_TEXT = re.compile(r"(token=)[^&\s\"']*", re.IGNORECASE)


class WebError(StationcheckError):
    """A web request cannot be served (refused, bad body, unknown path); carries its status."""

    exit_code = 1

    def __init__(self, status: int, message: str) -> None:
        super().__init__(message)
        self.status = status


def is_loopback(host: str) -> bool:
    """True for localhost and loopback addresses (127.0.0.0/8, ::1)."""
    if host.lower() in ("localhost", "localhost."):
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def _is_ip(host: str) -> bool:
    try:
        ipaddress.ip_address(host.strip("[]"))
    except ValueError:
        return False
    return True


def new_token() -> str:
    return secrets.token_urlsafe(18)


def hide_token(text: str) -> str:
    """``text`` with every ``token=...`` value replaced, for logs."""
    return _TOKEN_IN_TEXT.sub(r"\1(hidden)", text)


@dataclass(frozen=True)
class Head:
    """What the guard looks at: the request line and headers (names lower-case)."""

    method: str
    path: str
    query: Mapping[str, str]
    headers: Mapping[str, str]


@dataclass(frozen=True)
class AccessRule:
    """``token`` None means open (loopback only); ``host_names`` are extra names the Host
    header may carry (a DNS name or alias of this PC)."""

    token: str | None = None
    host_names: tuple[str, ...] = ()

    @classmethod
    def for_host(cls, host: str, token: str | None, host_names: tuple[str, ...] = ()) -> AccessRule:
        """Open on loopback unless a token is given; beyond loopback a token is mandatory."""
        if token is not None and len(token) < 12:
            raise StationcheckError("an access token needs at least 12 characters")
        if token is None and not is_loopback(host):
            token = new_token()
        return cls(token, tuple(name.lower().rstrip(".") for name in host_names))

    def start_url(self, base_url: str) -> str:
        return f"{base_url}?token={self.token}" if self.token else base_url

    def host_allowed(self, host_name: str, bound: str) -> bool:
        name = host_name.lower().rstrip(".")
        if is_loopback(name) or name in self.host_names:
            return True
        if name == bound.lower().strip("[]"):
            return True
        if bound in ("0.0.0.0", "::", ""):
            return _is_ip(name) or name == socket.gethostname().lower()
        return False

    def admit(self, head: Head, bound: str, cookie_name: str) -> str | None:
        """Raise :class:`WebError` unless ``head`` may go on; returns a Set-Cookie value when
        the token came in the address (so the page's own later requests carry it)."""
        host = head.headers.get("host", "")
        try:
            host_name = urlsplit(f"//{host}").hostname or ""
            urlsplit(f"//{host}").port  # noqa: B018  # a bad port raises ValueError
        except ValueError:
            host_name = ""
        if not host_name:
            raise WebError(400, "refused: the request names no valid Host")
        if not self.host_allowed(host_name, bound):
            raise WebError(
                421,
                f"refused: this screen does not answer to the host name "
                f"{host_name!r} (start it with --allow-host {host_name} if "
                "that name is this PC)",
            )
        cookie = self._check_token(head, cookie_name)
        if head.method not in SAFE_METHODS:
            _check_write(head, host)
        return cookie

    def _check_token(self, head: Head, cookie_name: str) -> str | None:
        if self.token is None:
            return None
        offered = head.query.get("token") or head.headers.get(HEADER_NAME)
        from_query = "token" in head.query
        if offered is None:
            offered = _cookie(head.headers.get("cookie", ""), cookie_name)
        if offered is None or not hmac.compare_digest(offered.encode(), self.token.encode()):
            raise WebError(
                401,
                "refused: this screen needs its access token (open the URL printed at start-up)",
            )
        if from_query:
            return f"{cookie_name}={self.token}; Path=/; HttpOnly; SameSite=Strict"
        return None


def _check_write(head: Head, host: str) -> None:
    own = f"http://{host}".lower()
    origin = head.headers.get("origin")
    if origin is not None:
        if origin.lower().rstrip("/") != own:
            raise WebError(403, f"refused: a write from another site ({origin})")
    else:
        referer = head.headers.get("referer")
        if referer is not None:
            parts = urlsplit(referer)
            if f"{parts.scheme}://{parts.netloc}".lower() != own:
                raise WebError(403, "refused: a write from another site")
    if not head.headers.get(WRITE_HEADER.lower()):
        raise WebError(
            403,
            f"refused: a write needs the {WRITE_HEADER} header (the screen's own page sends it)",
        )
    kind = head.headers.get("content-type", "").split(";")[0].strip().lower()
    if kind != "application/json":
        raise WebError(415, f"refused: a write sends application/json, not {kind or 'nothing'}")


def _cookie(header: str, name: str) -> str | None:
    for part in header.split(";"):
        key, _, value = part.strip().partition("=")
        if key == name:
            return value
    return None
