"""Who may use a screen: anyone on this PC when bound to loopback, token holders otherwise.

A token arrives as ``?token=`` (the printed start URL), then lives in a cookie, or as the
``X-Access-Token`` header for scripts. Comparison is constant-time.
"""

from __future__ import annotations

import hmac
import ipaddress
import secrets
from dataclasses import dataclass
from typing import TYPE_CHECKING

from stationcheck.errors import StationcheckError

if TYPE_CHECKING:
    from stationcheck.web.server import Request

COOKIE_NAME = "stationcheck_token"
HEADER_NAME = "x-access-token"


def is_loopback(host: str) -> bool:
    """True for localhost and loopback addresses (127.0.0.0/8, ::1)."""
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def new_token() -> str:
    return secrets.token_urlsafe(18)


@dataclass(frozen=True)
class AccessRule:
    """``token`` None means open (loopback only); otherwise every request must carry it."""

    token: str | None = None

    @classmethod
    def for_host(cls, host: str, token: str | None) -> AccessRule:
        """Open on loopback unless a token is given; beyond loopback a token is mandatory."""
        if token is not None and len(token) < 12:
            raise StationcheckError("an access token needs at least 12 characters")
        if token is None and not is_loopback(host):
            token = new_token()
        return cls(token)

    def start_url(self, base_url: str) -> str:
        return f"{base_url}?token={self.token}" if self.token else base_url

    def check(self, request: Request) -> str | None:
        """Raise a 401 WebError if the token is required and missing or wrong.

        Returns a Set-Cookie value when the token came in the query, so the page's own later
        requests carry it without the query.
        """
        if self.token is None:
            return None
        from stationcheck.web.server import WebError

        offered = request.query.get("token") or request.headers.get(HEADER_NAME)
        from_query = "token" in request.query
        if offered is None:
            offered = _cookie(request.headers.get("cookie", ""), COOKIE_NAME)
        if offered is None or not hmac.compare_digest(offered.encode(), self.token.encode()):
            raise WebError(401, "refused: this screen needs its access token "
                                "(open the URL printed at start-up)")
        if from_query:
            return f"{COOKIE_NAME}={self.token}; Path=/; HttpOnly; SameSite=Strict"
        return None


def _cookie(header: str, name: str) -> str | None:
    for part in header.split(";"):
        key, _, value = part.strip().partition("=")
        if key == name:
            return value
    return None
