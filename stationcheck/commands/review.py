"""``stationcheck review``: the quality engineer's screen over a step log (a local web app,
read-only, safe beside a station that is writing), plus plain outputs for scripts.

A ``postgresql://`` target reviews the plant database instead: the same outputs across
stations, with ``--station`` / ``--line`` filters and ``--stations`` side by side.

Exit codes: 0 done; 1 no unit with that serial (--unit); 6 the log is missing, not a step log,
damaged or of a newer schema, or the plant database refused or is unreachable; 7 the plant
extra is missing; 64 bad command line.
"""

from __future__ import annotations

import argparse
import json
import sys
from itertools import islice
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

if TYPE_CHECKING:
    from stationcheck.quality.period import Period
    from stationcheck.store.sqlite_log import SqliteStepLog

DEFAULT_PORT = 8372
TEXT_LIMIT = 50

_EPILOG = """\
without --units/--unit/--figures/--trend/--report it starts the review screen in the browser.
times (--since, --until): 2026-03-01, 2026-03-01T14:30 (local time), or epoch seconds; a bare
--until date includes that whole day. Periods use the wall clock the log recorded.

exit codes: 0 done, 1 no unit with that serial (--unit), 6 the log is missing, not a step log,
damaged or too new, or the plant database refused or is unreachable, 7 the plant extra is
missing (postgresql:// targets), 64 bad command line.
"""


def _time_arg(end: bool) -> Any:
    def parse(text: str) -> float:
        from stationcheck.quality.period import parse_time

        try:
            return parse_time(text, end=end)
        except ValueError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from exc

    return parse


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    from stationcheck.web.app import add_web_arguments

    p = subparsers.add_parser(
        "review",
        help="review units, station figures and trends of a step log (web screen or text)",
        description=(
            "Opens a step log read-only: find units by serial, time, result, failed position "
            "or alarm; see each unit's steps with torque and angle against their limits; "
            "station figures (first-time-through with a 95 % Wilson interval, NOK per "
            "position, retries, cycle times, alarms); trends per fastener position with EWMA, "
            "CUSUM and Western Electric rules; CSV/JSON export and an offline HTML report."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "log",
        metavar="LOG",
        help="step log (.sqlite), or the plant database: "
        "postgresql://USER@HOST[:PORT]/DATABASE (password from "
        "STATIONCHECK_PG_PASSWORD or --password-file)",
    )
    what = p.add_mutually_exclusive_group()
    what.add_argument("--units", action="store_true", help="print the units that match the filters")
    what.add_argument("--unit", metavar="SERIAL", help="print one unit's steps and alarms")
    what.add_argument("--figures", action="store_true", help="print the station figures")
    what.add_argument("--trend", metavar="POSITION", help="print one fastener position's trend")
    what.add_argument(
        "--report",
        metavar="OUT.html",
        type=Path,
        help="write a standalone HTML report of the period",
    )
    what.add_argument(
        "--stations",
        action="store_true",
        help="plant database: figures per station side by side (--trend-of for "
        "one position's trend at each)",
    )
    plant = p.add_argument_group("plant database (postgresql:// LOG)")
    plant.add_argument("--station", metavar="ID[,ID...]", default="", help="only these stations")
    plant.add_argument("--line", metavar="LINE[,LINE...]", default="", help="only these lines")
    plant.add_argument(
        "--trend-of",
        metavar="POSITION",
        help="with --stations: this position's trend at each station",
    )
    plant.add_argument(
        "--password-file", type=Path, default=None, help="file holding the database password"
    )
    fmt = p.add_mutually_exclusive_group()
    fmt.add_argument("--csv", action="store_true", help="CSV (units, a unit's steps, a trend)")
    fmt.add_argument("--json", action="store_true", help="one JSON document")
    p.add_argument("--since", type=_time_arg(False), help="period start (inclusive)")
    p.add_argument("--until", type=_time_arg(True), help="period end (exclusive)")
    p.add_argument("--serial", metavar="PREFIX", help="units whose serial starts with this")
    p.add_argument(
        "--result",
        choices=("OK", "NOK", "reworked", "first_time_through", "aborted", "open"),
        help="units with this result",
    )
    p.add_argument("--failed-position", metavar="ZONE", help="units that failed at this position")
    p.add_argument("--alarm", metavar="CODE", help="units that raised this alarm")
    p.add_argument("--order", choices=("newest", "oldest", "serial"), default="newest")
    p.add_argument(
        "--limit",
        type=int,
        help=f"at most this many units (default {TEXT_LIMIT} as text, all with --csv/--json)",
    )
    p.add_argument(
        "--measure",
        choices=("torque", "angle"),
        default="torque",
        help="for --trend (default torque)",
    )
    p.add_argument("--points", type=int, default=500, help="--trend: latest N units (10-5000)")
    add_web_arguments(p, DEFAULT_PORT)
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.quality.period import Period

    try:
        period = Period(args.since, args.until)
    except ValueError as exc:
        return _usage(str(exc))
    if args.limit is not None and args.limit < 1:
        return _usage("--limit must be >= 1")
    if not 10 <= args.points <= 5000:
        return _usage("--points must be in 10..5000")
    if args.csv and (args.figures or args.report):
        return _usage("--csv is for --units, --unit and --trend; figures come as text or --json")
    source = _source(args)
    if (args.station or args.line or args.stations) and not source.is_plant:
        return _usage(
            "--station, --line and --stations need the plant database "
            "(postgresql://...); one step log is one station"
        )
    if not (args.units or args.unit or args.figures or args.trend or args.report or args.stations):
        return _serve(args, source)
    if args.stations:
        return _print_stations(source, args, period)
    with source.reader(_scope(args)) as step_log:
        if args.units:
            return _print_units(step_log, args, period)
        if args.unit:
            return _print_unit(step_log, args)
        if args.figures:
            return _print_figures(step_log, args, period)
        if args.trend:
            return _print_trend(step_log, args, period)
        return _write_report(step_log, args, period, source.name)


def _usage(message: str) -> int:
    from stationcheck.cli import EXIT_USAGE

    _say(f"stationcheck review: error: {message}", file=sys.stderr)
    return EXIT_USAGE


def _source(args: argparse.Namespace) -> Any:
    from stationcheck.web.review_screen import review_source

    return review_source(args.log, args.password_file)


def _scope(args: argparse.Namespace) -> Any:
    if not (args.station or args.line):
        return None
    from stationcheck.plant.review_source import Scope

    return Scope(
        tuple(s for s in args.station.split(",") if s), tuple(s for s in args.line.split(",") if s)
    )


def _serve(args: argparse.Namespace, source: Any) -> int:
    from stationcheck.web.app import serve_until_interrupted, start_server
    from stationcheck.web.review_screen import build_review_router

    server = start_server(
        build_review_router(source), args.host, args.port, args.token, tuple(args.allow_host)
    )
    return serve_until_interrupted(
        server, f"stationcheck review of {source.name}", not args.no_browser
    )


def _print_stations(source: Any, args: argparse.Namespace, period: Period) -> int:
    from stationcheck.plant.side_by_side import (
        station_figures_rows,
        station_trends,
        trend_summary,
    )

    with source.reader(_scope(args)) as reader:
        rows = station_figures_rows(source, reader, period)
    trends = []
    if args.trend_of:
        trends = [
            trend_summary(sid, t)
            for sid, t in station_trends(
                source,
                [r["station_id"] for r in rows],
                args.trend_of,
                args.measure,
                period,
                args.points,
            )
        ]
    if args.json:
        print(
            json.dumps(
                {"period": period.describe(), "stations": rows, "trends": trends},
                ensure_ascii=False,
            )
        )
        return 0
    print(f"period: {period.describe()}")
    print(
        f"{'station':<16} {'line':<10} {'units':>8} {'FTT %':>6} {'95 % interval':>15} "
        f"{'NOK':>6} {'NOK res':>7} {'retries':>7} {'cycle s':>7}"
    )
    for r in rows:
        ftt = f"{100 * r['ftt_rate']:6.1f}" if r["ftt_rate"] is not None else "     -"
        ci = (
            "{:6.1f} to {:5.1f}".format(*(100 * v for v in r["ftt_interval_95"]))
            if r["ftt_interval_95"]
            else "-"
        )
        cycle = (
            f"{r['cycle_time_median_s']:7.1f}"
            if r["cycle_time_median_s"] is not None
            else "      -"
        )
        print(
            f"{r['station_id']:<16} {r['line']:<10} {r['units']:>8,} {ftt} {ci:>15} "
            f"{r['nok']:>6,} {r['nok_results']:>7,} {r['retries']:>7,} {cycle}"
        )
    for t in trends:
        basis = (
            f"centre {t['centre']:.3f}, sigma {t['sigma']:.4f}"
            if t["sigma"] is not None
            else "no limits"
        )
        print(
            f"{args.trend_of} {args.measure} at {t['station_id']}: {t['count']} units, {basis}; "
            f"{'; '.join(t['findings']) or 'no signal'}"
        )
    return 0


def _print_units(step_log: SqliteStepLog, args: argparse.Namespace, period: Period) -> int:
    from stationcheck.quality import unit_export
    from stationcheck.store import queries
    from stationcheck.store.log_records import UnitQuery

    try:
        query = UnitQuery(
            serial_prefix=args.serial,
            from_s=period.from_s,
            to_s=period.to_s,
            result=args.result,
            failed_position=args.failed_position,
            alarm_code=args.alarm,
            order=args.order,
            count_total=False,
        )
    except ValueError as exc:
        return _usage(str(exc))
    conn = step_log.connection
    limit = (
        args.limit if args.limit is not None else (None if args.csv or args.json else TEXT_LIMIT)
    )
    rows = (unit_export.unit_dict(u) for u in islice(unit_export.iter_units(conn, query), limit))
    if args.csv:
        sys.stdout.writelines(unit_export.csv_chunks(rows, unit_export.UNIT_FIELDS))
        return 0
    if args.json:
        sys.stdout.writelines(unit_export.json_array_chunks(rows))
        return 0
    _say(
        f"{'serial':<14} {'started':<19} {'result':<8} {'passes':>6} {'retries':>7} "
        f"{'NOK':>4} {'cycle s':>8}  failed positions"
    )
    shown = 0
    for row in rows:
        shown += 1
        cycle = f"{row['cycle_time_s']:8.1f}" if row["cycle_time_s"] is not None else " " * 8
        status = row["status"] + ("*" if row["reworked"] else "")
        _say(
            f"{row['serial']:<14} {(row['started_at'] or '')[:19]:<19} {status:<8} "
            f"{row['passes']:>6} {row['retries']:>7} {row['nok_results']:>4} {cycle}  "
            f"{', '.join(row['failed_positions']) or '-'}"
        )
    total = queries.count_units(conn, query)
    _say(f"{total:,} unit{'s' if total != 1 else ''} match; {shown:,} shown (* reworked)")
    return 0


def _print_unit(step_log: SqliteStepLog, args: argparse.Namespace) -> int:
    from stationcheck.core.events import RESULT_NOK
    from stationcheck.core.result_words import unit_word
    from stationcheck.errors import StationcheckError
    from stationcheck.quality import unit_export

    unit = step_log.unit(args.unit)
    if unit is None:
        raise StationcheckError(f"no unit with serial {args.unit!r} in {args.log}")
    steps, alarms = step_log.steps(args.unit), step_log.alarms(args.unit)
    if args.csv:
        sys.stdout.write(unit_export.unit_steps_csv(steps))
        return 0
    detail = unit_export.unit_detail(unit, steps, alarms)
    if args.json:
        print(json.dumps(detail, ensure_ascii=False))
        return 0
    u = detail["unit"]
    _say(
        f"unit {u['serial']}: {u['status']}{' (reworked)' if u['reworked'] else ''}, "
        f"{u['passes']} pass(es), started {u['started_at']}, cycle time "
        f"{u['cycle_time_s'] or 0:.1f} s, rework time {u['rework_time_s']:.1f} s"
    )
    _say(
        f"{'pass':<6} {'step':<16} {'position':<10} {'try':>3} {'result':<13} "
        f"{'torque N·m':>11} {'angle °':>8}"
    )
    for s in steps:
        torque = f"{s.torque_nm:11.2f}" if s.torque_nm is not None else " " * 11
        angle = f"{s.angle_deg:8.1f}" if s.angle_deg is not None else " " * 8
        decided = " (left)" if s.position_result == RESULT_NOK else ""
        _say(
            f"{'rework' if s.is_rework else 'first':<6} {s.step:<16} {s.position or '-':<10} "
            f"{s.attempt:>3} {unit_word(s.result) + decided:<13} {torque} {angle}"
        )
    if u["nok_reason"]:
        _say(
            f"why {'NOK' if u['status'] == 'NOK' else 'the first pass was NOK'}: {u['nok_reason']}"
        )
    for a in alarms:
        _say(f"alarm {a.code} ({a.severity}): {a.message}")
    return 0


def _print_figures(step_log: SqliteStepLog, args: argparse.Namespace, period: Period) -> int:
    from stationcheck.quality.figures import station_figures
    from stationcheck.quality.json_views import figures_dict

    figures = figures_dict(station_figures(step_log.connection, period))
    if args.json:
        print(json.dumps(figures, ensure_ascii=False))
        return 0
    ftt, ci = figures["ftt_rate"], figures["ftt_interval_95"]
    _say(f"period: {figures['period']['text']}")
    _say(
        f"units started {figures['units']:,}: OK {figures['ok']:,}, NOK {figures['nok']:,}, "
        f"aborted {figures['aborted']:,}, open {figures['open']:,}, reworked "
        f"{figures['reworked']:,}"
    )
    if ftt is not None:
        _say(
            f"first-time-through {figures['first_time_through']:,} of {figures['ended']:,} "
            f"ended units = {100 * ftt:.1f} % (95 % Wilson interval {100 * ci[0]:.1f} to "
            f"{100 * ci[1]:.1f} %); {figures['open']:,} open unit(s) not counted"
        )
    _say(f"NOK results {figures['nok_results']:,}, retries {figures['retries']:,}")
    for title, key in (
        ("NOK by position", "nok_by_position"),
        ("retries by position", "retries_by_position"),
    ):
        bars = ", ".join(f"{b['position']} {b['count']}" for b in figures[key]) or "none"
        _say(f"{title}: {bars}")
    ct = figures["cycle_time"]
    if ct["count"]:
        _say(
            f"cycle time (first pass, {ct['count']:,} units): median {ct['median_s']:.1f} s, "
            f"p90 {ct['p90_s']:.1f} s, mean {ct['mean_s']:.1f} s, max {ct['max_s']:.1f} s"
        )
    alarms = ", ".join(f"{a['code']} {a['count']}" for a in figures["alarms"]) or "none"
    _say(f"alarms: {alarms}")
    return 0


def _print_trend(step_log: SqliteStepLog, args: argparse.Namespace, period: Period) -> int:
    from stationcheck.quality import unit_export
    from stationcheck.quality.json_views import trend_dict, trend_findings
    from stationcheck.quality.trends import position_trend

    trend = position_trend(step_log.connection, args.trend, args.measure, period, args.points)
    body = trend_dict(trend)
    if args.json:
        body["findings"] = trend_findings(trend)
        print(json.dumps(body, ensure_ascii=False))
        return 0
    if args.csv:
        sys.stdout.writelines(unit_export.trend_csv(body))
        return 0
    _say(f"{args.trend} final {args.measure}: {body['count']} units")
    if body["sigma"] is not None:
        _say(
            f"centre {body['centre']:.3f} {trend.unit}, sigma {body['sigma']:.4f} (first "
            f"{body['baseline']} values)"
        )
    for finding in trend_findings(trend) or ["no signal: within its control limits and run rules"]:
        _say(finding)
    return 0


def _write_report(
    step_log: SqliteStepLog, args: argparse.Namespace, period: Period, name: str
) -> int:
    from stationcheck.errors import InputFileError
    from stationcheck.quality.review_report import build_report

    html = build_report(step_log.connection, period, name)
    try:
        args.report.write_text(html, encoding="utf-8")
    except OSError as exc:
        raise InputFileError(f"cannot write the report {args.report}: {exc}") from exc
    _say(f"report written: {args.report} ({len(html) // 1024} kB)")
    return 0


def _say(text: str, file: TextIO | None = None) -> None:
    """One line for a person at a terminal: what came from the log cannot steer it."""
    from stationcheck.shown_text import terminal_text

    print(terminal_text(text), file=file or sys.stdout)
