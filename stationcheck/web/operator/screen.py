"""The operator screen beside a run: its feed and its web server, started and closed the way
the command line asks (see :mod:`.options`)."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from stationcheck.web.app import start_server
from stationcheck.web.operator.feed import OperatorFeed, ScreenMode
from stationcheck.web.operator.operator_routes import operator_router
from stationcheck.web.operator.options import DEFAULT_SCREEN_PORT, pace_speed
from stationcheck.web.operator.pacing import RealTimePacer

if TYPE_CHECKING:
    from pathlib import Path

    from stationcheck.core.plan import StationPlan
    from stationcheck.live.linked_station import LiveLoop
    from stationcheck.pipeline.session import Watcher
    from stationcheck.web.listener import WebServer


class OperatorScreen:
    """A feed served on its own web server; :meth:`close` ends the viewers' streams first."""

    def __init__(self, feed: OperatorFeed, server: WebServer) -> None:
        self.feed = feed
        self.server = server

    @classmethod
    def start(
        cls,
        plan: StationPlan,
        *,
        mode: ScreenMode,
        host: str = "127.0.0.1",
        port: int = DEFAULT_SCREEN_PORT,
        token: str | None = None,
        host_names: tuple[str, ...] = (),
    ) -> OperatorScreen:
        feed = OperatorFeed(plan, mode=mode)
        try:
            server = start_server(operator_router(feed), host, port, token, host_names)
        except BaseException:
            feed.close()
            raise
        return cls(feed, server)

    @property
    def url(self) -> str:
        """The address to open (with the access token when one is needed)."""
        return self.server.access.start_url(self.server.url)

    def attach_live(self, loop: LiveLoop) -> None:
        """Follow a live loop (a ``run_live`` ``on_ready`` hook): every step and frame, and
        acknowledge presses applied on the loop's thread. A unit the loop continues from the
        step log shows the positions it had done before the restart."""
        self.feed.views.fold(loop.decisions.resumed_from)
        self.feed.decisions = loop.decisions
        loop.decisions.add_sink(self.feed)
        loop.frame_sinks = (*loop.frame_sinks, self.feed)

    def close(self) -> None:
        self.feed.close()
        self.server.close()


@dataclass
class ScreenWiring:
    """What a command hands its run: extra frame-and-step sinks, the screen if any."""

    screen: OperatorScreen | None = None
    watchers: list[Watcher] = field(default_factory=list)

    @property
    def url(self) -> str | None:
        return self.screen.url if self.screen is not None else None

    def hold(self, interactive: bool | None = None) -> None:
        """After a replay: keep the screen up, showing how the run ended, until Ctrl-C, so
        the viewer is not left with "not connected". Only for a person at a terminal
        (``interactive`` defaults to whether standard input is one); scripts go on at once."""
        if interactive is None:
            interactive = sys.stdin.isatty()
        if self.screen is None or not interactive:
            return
        print(
            f"The operator screen stays at {self.screen.url} (Ctrl-C stops it)",
            file=sys.stderr,
            flush=True,
        )
        try:
            self.screen.server.wait()
        except KeyboardInterrupt:
            pass


def _plan(config_path: Path) -> StationPlan:
    from stationcheck.config import load_config

    return load_config(config_path).to_plan()


@contextmanager
def command_screen(
    args: argparse.Namespace, config_path: Path, mode: ScreenMode
) -> Iterator[ScreenWiring]:
    """The screen asked for on the command line (``--screen``), closed at the end.

    A replay gets the feed and, with a pace, a :class:`RealTimePacer` as ``watchers`` (sinks
    of every step and frame); a live run passes ``wiring.screen.attach_live`` as ``on_ready``.
    """
    wiring = ScreenWiring()
    speed = pace_speed(args) if mode == "replay" else None
    if args.screen:
        wiring.screen = OperatorScreen.start(
            _plan(config_path),
            mode=mode,
            host=args.screen_host,
            port=args.screen_port,
            token=args.screen_token,
            host_names=tuple(getattr(args, "screen_allow_host", ())),
        )
        if mode == "replay":
            wiring.watchers.append(wiring.screen.feed)
    if speed is not None:
        wiring.watchers.append(RealTimePacer(speed))
    try:
        yield wiring
    finally:
        if wiring.screen is not None:
            wiring.screen.close()
