"""Command-line options for the operator screen (``--screen``, ``--screen-port``, ... and
``--pace`` for replays). Imports nothing heavy: every command registers them at start-up."""

from __future__ import annotations

import argparse

from stationcheck.errors import InputFileError

DEFAULT_SCREEN_PORT = 8474


def add_screen_arguments(p: argparse.ArgumentParser, *, replay: bool) -> None:
    group = p.add_argument_group("operator screen")
    group.add_argument(
        "--screen",
        action="store_true",
        help="serve the operator screen (a full-screen browser page) while "
        "running and print its address",
    )
    group.add_argument(
        "--screen-host",
        default="127.0.0.1",
        help="address the screen listens on (default 127.0.0.1: this PC only; "
        "any other address needs an access token)",
    )
    group.add_argument(
        "--screen-port",
        type=int,
        default=DEFAULT_SCREEN_PORT,
        help="screen port (default %(default)s; 0 picks a free one)",
    )
    group.add_argument(
        "--screen-token",
        default=None,
        help="access token for the screen (default: none on 127.0.0.1, a "
        "random one printed at start-up elsewhere)",
    )
    group.add_argument(
        "--screen-allow-host",
        action="append",
        default=[],
        metavar="NAME",
        help="a host name of this PC that browsers may use for the screen "
        "(repeat for more; localhost and IP addresses need none)",
    )
    if replay:
        group.add_argument(
            "--pace",
            type=float,
            default=None,
            metavar="SPEED",
            help="play at SPEED times the video's own rate so it can be "
            "watched (default: 1 with --screen, else as fast as possible; "
            "0: as fast as possible)",
        )


LOOPBACK = ("127.0.0.1", "localhost", "::1")


def audience_words(args: argparse.Namespace) -> str:
    """Who can watch the camera picture on the operator screen, for the start-up lines."""
    if args.screen_host in LOOPBACK:
        return "Privacy: the operator screen's camera picture is seen on this PC only."
    return (
        f"Privacy: the operator screen listens on {args.screen_host}: anyone on that "
        "network with its address and access token sees the camera picture live."
    )


def pace_speed(args: argparse.Namespace) -> float | None:
    """The playback speed asked for, None for as fast as possible."""
    pace = getattr(args, "pace", None)
    if pace is None:
        return 1.0 if args.screen else None
    if pace < 0:
        raise InputFileError(f"--pace must be >= 0, got {pace}")
    return pace or None
