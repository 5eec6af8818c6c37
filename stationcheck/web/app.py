"""Starting a screen from the CLI: common options, the start line, the browser, Ctrl-C."""

from __future__ import annotations

import argparse
import logging
import webbrowser
from pathlib import Path

from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.server import Request, Response, Router, resolve_static

log = logging.getLogger(__name__)

STATIC_ROOT = Path(__file__).parent / "static"
COMMON_ROOT = STATIC_ROOT / "common"


def add_web_arguments(p: argparse.ArgumentParser, default_port: int) -> None:
    """--host, --port, --no-browser and --token, the same on every screen."""
    p.add_argument(
        "--host",
        default="127.0.0.1",
        help="address to listen on (default 127.0.0.1: this PC only; any other "
        "address needs an access token)",
    )
    p.add_argument(
        "--port",
        type=int,
        default=default_port,
        help=f"port (default {default_port}; 0 picks a free one)",
    )
    p.add_argument("--no-browser", action="store_true", help="do not open a browser")
    p.add_argument(
        "--token",
        help="access token to require (default: none on 127.0.0.1, "
        "a random one printed at start-up elsewhere)",
    )
    p.add_argument(
        "--allow-host",
        action="append",
        default=[],
        metavar="NAME",
        help="a host name of this PC that browsers may use in the address (repeat "
        "for more; localhost and IP addresses need none)",
    )


def add_common_files(router: Router) -> None:
    """Serve the shared look (``/common/base.css``, the safety caution) to every screen."""

    def common(request: Request) -> Response:
        file = resolve_static(COMMON_ROOT, request.path.removeprefix("/common"))
        kind = "text/css" if file.suffix == ".css" else "text/html"
        return Response(
            200, file.read_bytes(), f"{kind}; charset=utf-8", {"Cache-Control": "no-cache"}
        )

    router.add("GET", "/common/*", common)


def start_server(
    router: Router, host: str, port: int, token: str | None, host_names: tuple[str, ...] = ()
) -> WebServer:
    """Bind and serve in a background thread; raises a one-line error when the port is taken."""
    access = AccessRule.for_host(host, token, host_names)
    return WebServer(router, host, port, access).start()


def serve_until_interrupted(server: WebServer, title: str, open_browser: bool) -> int:
    """Print where the screen is, open it, and block until Ctrl-C."""
    url = server.access.start_url(server.url)
    print(f"{title}: {url}  (Ctrl-C stops)", flush=True)
    if open_browser:
        try:
            webbrowser.open(url)
        except webbrowser.Error as exc:
            log.warning("could not open a browser: %s", exc)
    try:
        server.wait()
    except KeyboardInterrupt:
        print("stopped", flush=True)
    finally:
        server.close()
    return 0
