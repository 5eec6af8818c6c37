"""``stationcheck forward --config CONFIG --to postgresql://...``: ship this station's step log to
the plant database, exactly once, and keep following it (or ``--once``: until caught up).

The password comes from STATIONCHECK_PG_PASSWORD, the file STATIONCHECK_PG_PASSWORD_FILE names,
or --password-file; TLS options go in the URL (``?sslmode=verify-full&sslrootcert=...``).

Exit codes: 0 stopped (or caught up with --once); 2 config error or no plant section; 6 the step
log or the plant database cannot be used (--once: unreachable); 7 the plant extra is missing;
64 bad command line.
"""

from __future__ import annotations

import argparse
import json
import signal
import sys
import threading
from pathlib import Path
from types import FrameType
from typing import Any

_EPILOG = """\
the config needs a plant section:  plant: {station_id: cover-1, line: line-2, plant: north}
password: STATIONCHECK_PG_PASSWORD, STATIONCHECK_PG_PASSWORD_FILE or --password-file (never in
the config or the URL). TLS: add ?sslmode=verify-full&sslrootcert=ca.pem to the URL.
while the server is away the station keeps logging; forwarding retries with back-off and
resumes from the server's high-water mark. The local log is only read.

exit codes: 0 stopped or caught up (--once), 2 config error, 6 step log or plant database
error, 7 plant extra missing, 64 bad command line.
"""


def add_plant_arguments(p: argparse.ArgumentParser, required: bool) -> None:
    p.add_argument(
        "--to",
        metavar="URL",
        required=required,
        dest="plant_url",
        help="plant database, postgresql://USER@HOST[:PORT]/DATABASE[?sslmode=...]",
    )
    p.add_argument(
        "--password-file",
        type=Path,
        default=None,
        help="file holding the database password (else STATIONCHECK_PG_PASSWORD)",
    )


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "forward",
        help="forward this station's step log to the plant database (PostgreSQL)",
        description="Ships every event of the station's step log to the plant's PostgreSQL "
        "database in order, in batches, exactly once, and keeps following the log.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--config", required=True, type=Path, help="station config (.yaml)")
    add_plant_arguments(p, required=True)
    p.add_argument("--log", type=Path, default=None, help="step log (default: the config's)")
    p.add_argument(
        "--once",
        action="store_true",
        help="forward what the log holds now and stop (exit 6 when unreachable)",
    )
    p.add_argument("--batch", type=int, default=5000, help="events per batch (default 5000)")
    p.add_argument(
        "--status-json",
        action="store_true",
        help="print the status as one JSON line per second (for a supervising run)",
    )
    p.add_argument(
        "--status-every",
        type=float,
        default=30.0,
        metavar="SECONDS",
        help="print how far forwarding has got (events and seconds behind) this often (default 30)",
    )
    p.set_defaults(handler=run)


def station_of(config_path: Path) -> tuple[str, Path]:
    from stationcheck.config import load_config
    from stationcheck.errors import ConfigError

    config = load_config(config_path)
    if config.station_id is None:
        raise ConfigError(
            f"{config_path}: no plant section; forwarding needs "
            "plant: {station_id: ..., line: ..., plant: ...}"
        )
    return config.station_id, config.log_path


def run(args: argparse.Namespace) -> int:
    from stationcheck.plant.connect import check_url, driver
    from stationcheck.plant.forwarder import Forwarder

    if not 1 <= args.batch <= 100_000:
        print("stationcheck forward: error: --batch must be in 1..100000", file=sys.stderr)
        return 64
    driver()
    check_url(args.plant_url)
    station_id, log_path = station_of(args.config)
    forwarder = Forwarder(
        args.log or log_path,
        station_id,
        args.plant_url,
        args.password_file,
        batch_events=args.batch,
    )
    if args.once:
        try:
            sent = forwarder.forward_once()
            print(forwarder.status.line() + f"; sent {sent} events", flush=True)
        finally:
            forwarder.close()
        return 0
    stop = stop_on_signals()
    every_s = 1.0 if args.status_json else max(1.0, args.status_every)
    threading.Thread(
        target=_report,
        args=(forwarder, stop, every_s, args.status_json),
        daemon=True,
        name="forward-status",
    ).start()
    forwarder.run(stop)
    stop.set()
    if args.status_json:
        print(json.dumps(forwarder.status.__dict__), flush=True)
    print(forwarder.status.line(), file=sys.stderr, flush=True)
    return 0


def stop_on_signals() -> threading.Event:
    """An event that SIGTERM or SIGINT sets, for a loop that ends its work cleanly."""
    stop = threading.Event()

    def on_signal(signum: int, frame: FrameType | None) -> None:
        stop.set()

    signal.signal(signal.SIGTERM, on_signal)
    signal.signal(signal.SIGINT, on_signal)
    return stop


def _report(forwarder: Any, stop: threading.Event, every_s: float, as_json: bool) -> None:
    while not stop.wait(every_s):
        status = forwarder.status
        print(json.dumps(status.__dict__) if as_json else status.line(), flush=True)
