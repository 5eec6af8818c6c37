"""``stationcheck simulate``: a PLC plus tightening controller on loopback, for demos and tests.

A scripted run keeps serving its last inputs after the script is done, so the station's run
can end with its video instead of with a lost PLC link (``--exit-after-script`` stops it
there). Exit codes: 0 stopped (Ctrl-C, SIGTERM, ``--units`` reached or the script done with
``--exit-after-script``); 3 unreadable station-inputs file; 5 the server could not listen;
64 bad command line.
"""

from __future__ import annotations

import argparse
import signal
import sys
import threading
from pathlib import Path
from types import FrameType


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "simulate",
        help="a simulated PLC and tightening controller (Modbus TCP server on loopback)",
        description=(
            "Serves the station's default Modbus address map like a PLC would: presents unit "
            "serials, and whenever the tool enable coil is on, runs the tool and sets a "
            "tightening result (demo data). With --inputs it presents a recorded station-inputs "
            "file at its times instead."
        ),
    )
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default loopback)")
    p.add_argument("--port", type=int, default=5020, help="TCP port (default 5020)")
    p.add_argument("--device-id", type=int, default=1, help="Modbus device id (default 1)")
    p.add_argument("--ok-rate", type=float, default=0.9, help="share of OK results (0..1)")
    p.add_argument("--seed", type=int, default=None, help="random seed (repeatable runs)")
    p.add_argument(
        "--serials",
        default="",
        help="comma-separated serials to present (default PC-000001 upwards)",
    )
    p.add_argument("--units", type=int, default=None, help="stop after this many units")
    p.add_argument("--torque-nm", type=float, default=5.0, help="target torque (N*m)")
    p.add_argument("--angle-deg", type=float, default=30.0, help="target angle (degrees)")
    p.add_argument(
        "--unit-gap-s",
        type=float,
        default=2.0,
        help="seconds between a finished unit and the next serial",
    )
    p.add_argument(
        "--heartbeat-timeout-ms",
        type=float,
        default=200.0,
        help="tool power drops when the station heartbeat has not changed for this "
        "long (default 200 ms)",
    )
    p.add_argument(
        "--inputs",
        type=Path,
        default=None,
        help="station-inputs JSON lines to present at their times (scripted mode); "
        "time 0 is when the station's heartbeat first counts",
    )
    p.add_argument(
        "--speed",
        type=float,
        default=1.0,
        help="present the --inputs this many times faster (match run --speed)",
    )
    p.add_argument(
        "--exit-after-script",
        action="store_true",
        help="with --inputs: stop once the script is done instead of serving on "
        "(for scripts that start the simulator and may not stop it)",
    )
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.core.observations import Observation
    from stationcheck.plc.simulator import SimulatorSettings, StationSimulator

    script: tuple[Observation, ...] = ()
    if args.inputs is not None:
        from stationcheck.pipeline.station_inputs import read_station_inputs

        script = read_station_inputs(args.inputs)
    try:
        settings = SimulatorSettings(
            ok_rate=args.ok_rate,
            seed=args.seed,
            serials=tuple(s.strip() for s in args.serials.split(",") if s.strip()),
            torque_target_nm=args.torque_nm,
            angle_target_deg=args.angle_deg,
            unit_gap_s=args.unit_gap_s,
            units=args.units,
            script_waits_for_station=bool(script),
            script_speed=args.speed,
            heartbeat_timeout_s=args.heartbeat_timeout_ms / 1000.0,
        )
    except ValueError as exc:
        print(f"stationcheck simulate: error: {exc}", file=sys.stderr)
        return 64
    simulator = StationSimulator(
        args.host, args.port, settings, script=script, device_id=args.device_id
    )

    def stop(signum: int, frame: FrameType | None) -> None:
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, stop)
    simulator.start()
    mode = (
        f"presenting {args.inputs} from the station's first heartbeat"
        if script
        else "generating units"
    )
    print(
        f"station simulator (demo data) listening on {args.host}:{args.port}, {mode}; "
        f"tool power only while the station heartbeat changes (timeout "
        f"{args.heartbeat_timeout_ms:g} ms); Ctrl-C stops it",
        flush=True,
    )
    try:
        simulator.wait()
        if script and simulator.error is None and not args.exit_after_script:
            print(
                f"script done ({simulator.units_presented} units, {simulator.results} "
                "results); still serving its last inputs; Ctrl-C stops it",
                flush=True,
            )
            threading.Event().wait()  # until Ctrl-C or SIGTERM
    except KeyboardInterrupt:
        pass
    finally:
        simulator.stop()
    print(
        f"station simulator stopped: {simulator.units_presented} units, "
        f"{simulator.results} results, {simulator.power_drops} tool power drops (station "
        "heartbeat stopped)",
        flush=True,
    )
    return 0
