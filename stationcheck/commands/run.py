"""``stationcheck run``: the live station loop (camera -> decisions -> PLC signals -> step log).

Exit codes: 0 stopped (Ctrl-C, or a video file ended); 2 bad config; 3 camera or file cannot be
opened; 4 bad model file; 5 signal link error; 6 step-log error; 64 bad command line.
"""

from __future__ import annotations

import argparse
import signal
import sys
from pathlib import Path
from types import FrameType
from typing import TYPE_CHECKING

from stationcheck.core import event_kinds as ev
from stationcheck.core.result_words import SHOWN_RESULT, unit_word

if TYPE_CHECKING:
    from stationcheck.live.linked_station import LiveLoop
    from stationcheck.pipeline.decision_core import DecisionStep


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "run",
        help="run the station live: camera, decisions, PLC signals, step log",
        description=(
            "Runs the live loop on the config's camera (or --source): newest frame -> keypoint "
            "detector -> tracker -> zones -> image judgements -> sequencer -> tool enable and "
            "status to the PLC, step log. Watchdogs drop the enable on stale frames, detector "
            "faults, lost track, PLC link loss or a frozen PLC, camera movement and any error. "
            "Privacy: the camera films the people who work at the station; see the privacy "
            "note below and in the README."
        ),
        epilog=_privacy_epilog(),
    )
    p.add_argument("--config", required=True, type=Path, help="station config (.yaml)")
    p.add_argument(
        "--source",
        default=None,
        help="camera index, stream URL or video file (default: the config's camera)",
    )
    # the names in stationcheck.plc.links.LINKS (not imported here: --help stays quick)
    p.add_argument(
        "--link",
        choices=("console", "client", "server"),
        default=None,
        help="signal link (default: the config's plc.mode)",
    )
    p.add_argument("--host", default=None, help="PLC address (default: the config's)")
    p.add_argument("--port", type=int, default=None, help="PLC port (default: the config's)")
    p.add_argument("--log", type=Path, default=None, help="step log (default: the config's)")
    p.add_argument(
        "--no-pace",
        action="store_true",
        help="read a video file as fast as possible instead of at its frame rate",
    )
    p.add_argument(
        "--speed",
        type=float,
        default=1.0,
        help="play a video file this many times faster than recorded (dry runs; "
        "give the simulator the same --speed)",
    )
    p.add_argument("--frames", type=int, default=None, help="stop after this many file frames")
    p.add_argument(
        "--forward-to",
        metavar="URL",
        default=None,
        help="also forward the step log to the plant database (postgresql://...), "
        "in a child process; the password from STATIONCHECK_PG_PASSWORD or "
        "--password-file",
    )
    p.add_argument(
        "--password-file",
        type=Path,
        default=None,
        help="file holding the plant database password (with --forward-to)",
    )
    from stationcheck.web.operator.options import add_screen_arguments

    add_screen_arguments(p, replay=False)
    p.set_defaults(handler=run)


def _privacy_epilog() -> str:
    from stationcheck.cli import PRIVACY_NOTE

    return f"Privacy: {PRIVACY_NOTE}"


class UnitCount:
    """Counts the units a run ended, by result, for the closing line (a step sink)."""

    def __init__(self) -> None:
        self.ended: dict[str, int] = {}

    def on_step(self, step: DecisionStep) -> None:
        for event in step.events:
            if isinstance(event, ev.UnitEnded):
                word = unit_word(event.result)
                self.ended[word] = self.ended.get(word, 0) + 1

    def on_stop(self, error: BaseException | None) -> None:
        """Nothing to make safe."""

    def words(self) -> str:
        total = sum(self.ended.values())
        if not total:
            return "no unit ended"
        order = list(SHOWN_RESULT.values())
        parts = ", ".join(
            f"{count} {word}"
            for word, count in sorted(
                self.ended.items(),
                key=lambda item: order.index(item[0]) if item[0] in order else 99,
            )
        )
        return f"{total} unit{'s' if total != 1 else ''} ended ({parts})"


def run(args: argparse.Namespace) -> int:
    from stationcheck.cli import PRIVACY_NOTE, SAFETY_NOTE
    from stationcheck.commands.check import warn_unproven_model
    from stationcheck.config import load_config
    from stationcheck.live.session import LiveSettings, run_live
    from stationcheck.web.operator.options import audience_words
    from stationcheck.web.operator.screen import command_screen

    if args.speed <= 0:
        print("stationcheck run: error: --speed must be > 0", file=sys.stderr)
        return 64
    print(f"Safety: {SAFETY_NOTE}", flush=True)
    print(f"Privacy: {PRIVACY_NOTE}", flush=True)
    settings = LiveSettings(
        config_path=args.config,
        log_path=args.log,
        source=args.source,
        link=args.link,
        host=args.host,
        port=args.port,
        pace=not args.no_pace,
        speed=args.speed,
        max_frames=args.frames,
    )

    def stop(signum: int, frame: FrameType | None) -> None:
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, stop)
    loops: list[LiveLoop] = []
    units = UnitCount()
    config = load_config(args.config)
    log_path = args.log or config.resolve(config.log.path)  # as run_live resolves it
    warn_unproven_model(config)

    def ready(loop: LiveLoop) -> None:
        loops.append(loop)
        loop.decisions.add_sink(units)
        if screen.screen is not None:
            screen.screen.attach_live(loop)

    forwarding = None
    if args.forward_to is not None:
        from stationcheck.plant.connect import check_url, driver
        from stationcheck.plant.supervisor import ForwardChild

        driver()
        check_url(args.forward_to)
        forwarding = ForwardChild(args.config, args.forward_to, args.log, args.password_file)
        print(f"Forwarding the step log in process {forwarding.pid}", flush=True)
    ended = "run ended"
    try:
        with command_screen(args, args.config, "live") as screen:
            if screen.screen is not None:
                print(f"Operator screen: {screen.url}", flush=True)
                print(audience_words(args), flush=True)
            run_live(settings, on_ready=ready)
    except KeyboardInterrupt:
        ended = "stopped"
    finally:
        if forwarding is not None:
            forwarding.stop()
            print(forwarding.line(), flush=True)
    print(
        f"{ended}: {summary(loops[0]) if loops else 'no frames'}; tool enable written off",
        flush=True,
    )
    print(f"{units.words()}; step log: {log_path}", flush=True)
    return 0


def summary(loop: LiveLoop) -> str:
    """Frames, drops, decision latency and heartbeat of a finished live run, in one line."""
    stats, worker = loop.stats, loop.worker
    text = (
        f"{stats.frames} frames at {stats.fps:.1f} frames/s, {loop.grabber.counts.dropped} dropped"
    )
    if worker.coil_latency_ms:
        import numpy as np

        p50, p99 = np.percentile(worker.coil_latency_ms, [50, 99])  # as the benchmark does
        text += f", decision to enable coil p50 {p50:.1f} ms / p99 {p99:.1f} ms"
    return f"{text}, heartbeat {loop.linked.heartbeat}"
