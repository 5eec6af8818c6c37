"""``stationcheck plant``: set up and keep the plant database (PostgreSQL), with the database
owner's login (never a station's):

- ``setup``: create or update the schema (versioned migrations) and the two group roles;
- ``add-station``: register a station (id, line, plant) and its own login role, which may only
  forward that station's events and read nothing;
- ``add-reviewer``: a login role that reads everything and writes nothing;
- ``fold``: fold forwarded events into units, steps and alarms (``--follow`` keeps at it).

Exit codes: 0 done; 6 the plant database refused or failed; 7 the plant extra is missing;
64 bad command line.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from stationcheck.commands.forward import add_plant_arguments, stop_on_signals


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "plant",
        help="set up the plant database: schema, roles, stations; fold events",
        description="Sets up and keeps the plant database (PostgreSQL), with the database "
        "owner's login (never a station's): schema and group roles (setup), one "
        "login role per station that may only forward that station's events "
        "(add-station), read-only review logins (add-reviewer), and the fold of "
        "forwarded events into units, steps and alarms (fold).",
    )
    actions = p.add_subparsers(dest="action", metavar="ACTION", required=True)
    setup = actions.add_parser("setup", help="create or update the schema and group roles")
    add_plant_arguments(setup, True)
    station = actions.add_parser("add-station", help="register a station and its login role")
    add_plant_arguments(station, True)
    station.add_argument("--station-id", required=True, help="the config's plant.station_id")
    station.add_argument("--line", required=True, help="line name")
    station.add_argument("--plant", required=True, dest="plant_name", help="plant name")
    station.add_argument("--role", default=None, help="login role (default station_<id>)")
    station.add_argument(
        "--role-password-file",
        type=Path,
        default=None,
        help="set the role's password from this file",
    )
    reviewer = actions.add_parser("add-reviewer", help="a login role that reads the database")
    add_plant_arguments(reviewer, True)
    reviewer.add_argument("--role", required=True, help="login role name")
    reviewer.add_argument(
        "--role-password-file",
        type=Path,
        default=None,
        help="set the role's password from this file",
    )
    fold = actions.add_parser("fold", help="fold forwarded events into units, steps, alarms")
    add_plant_arguments(fold, True)
    fold.add_argument("--follow", action="store_true", help="keep folding until stopped")
    p.set_defaults(handler=run)


def _secret(path: Path | None) -> str | None:
    from stationcheck.errors import InputFileError

    if path is None:
        return None
    try:
        return path.read_text(encoding="utf-8").strip()
    except OSError as exc:
        raise InputFileError(f"cannot read {path}: {exc}") from exc


def run(args: argparse.Namespace) -> int:
    from stationcheck.plant import plant_schema
    from stationcheck.plant.connect import connect
    from stationcheck.plant.fold import fold_all

    conn = connect(args.plant_url, args.password_file, application="stationcheck plant")
    with conn:
        if args.action == "setup":
            version = plant_schema.migrate(conn)
            print(
                f"plant database at schema version {version}; group roles "
                f"{plant_schema.STATION_GROUP} (forward only) and {plant_schema.REVIEW_GROUP} (read only)"
            )
        elif args.action == "add-station":
            role = plant_schema.add_station(
                conn,
                args.station_id,
                args.line,
                args.plant_name,
                args.role,
                _secret(args.role_password_file),
            )
            print(
                f"station {args.station_id} ({args.line}, {args.plant_name}) forwards as role "
                f"{role}"
            )
        elif args.action == "add-reviewer":
            role = plant_schema.add_reviewer(conn, args.role, _secret(args.role_password_file))
            print(f"role {role} may read the plant database")
        else:
            plant_schema.require_current(conn)
            if not args.follow:
                print(f"folded {fold_all(conn)} events")
                return 0
            stop = stop_on_signals()
            total = 0
            while not stop.is_set():
                started = time.monotonic()
                total += fold_all(conn)
                stop.wait(max(0.0, 1.0 - (time.monotonic() - started)))
            print(f"folded {total} events", file=sys.stderr)
    return 0
