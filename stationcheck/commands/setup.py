"""``stationcheck setup [CONFIG]``: the manufacturing engineer's screen in the browser."""

from __future__ import annotations

import argparse
from pathlib import Path

DEFAULT_PORT = 8371


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    from stationcheck.web.app import add_web_arguments

    p = subparsers.add_parser(
        "setup",
        help="set up a station in the browser: reference frame, zones, steps, dry run",
        description=(
            "Starts the setup screen on this PC and opens it in the browser: take the reference "
            "frame, draw zones, build the steps, teach check zones, see the config checked as "
            "you go, dry-run a recorded video, and save the YAML (comments kept). Without "
            "CONFIG it starts a new config. Files it reads or writes must lie inside the "
            "setup folder (--root)."
        ),
    )
    p.add_argument(
        "config",
        type=Path,
        nargs="?",
        help="station config to edit (a new one when left out or not there yet)",
    )
    p.add_argument(
        "--root",
        type=Path,
        help="folder the screen may read and write (default: the current folder, "
        "or the config's folder when it lies outside)",
    )
    add_web_arguments(p, DEFAULT_PORT)
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.errors import InputFileError
    from stationcheck.web.app import serve_until_interrupted, start_server
    from stationcheck.web.setup import SetupSession, Workspace, build_router, default_root

    root: Path = args.root if args.root is not None else default_root(args.config, Path.cwd())
    if not root.is_dir():
        raise InputFileError(f"--root {root}: no such folder (tried {root.resolve()})")
    workspace = Workspace(root)
    if args.config is not None and not args.config.resolve().is_relative_to(workspace.root):
        resolved = args.config.resolve()
        shown = (
            str(args.config)
            if str(args.config) == str(resolved)
            else (f"{args.config} ({resolved})")
        )
        raise InputFileError(
            f"{shown} lies outside the setup folder {workspace.root}; add "
            "--root with a folder that holds it"
        )
    session = SetupSession.open(workspace, args.config)
    server = start_server(
        build_router(session), args.host, args.port, args.token, tuple(args.allow_host)
    )
    return serve_until_interrupted(server, "stationcheck setup", not args.no_browser)
