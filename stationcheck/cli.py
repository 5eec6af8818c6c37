"""The ``stationcheck`` command: one subcommand per job, each in ``stationcheck.commands``.

Exit codes: 0 success; 1 findings or a failed check (e.g. ``check`` found errors); 2 config
error; 3 unreadable input file; 4 model error; 5 PLC link error; 6 step-log error; 7 missing
optional extra; 64 usage error; 70 internal error (a bug: please report the traceback).
"""

from __future__ import annotations

import argparse
import importlib
import logging
import os
import sys
import traceback
from collections.abc import Sequence

from stationcheck import __version__
from stationcheck.errors import StationcheckError, first_line
from stationcheck.shown_text import terminal_text

EXIT_USAGE = 64
EXIT_INTERNAL = 70

# Each module in stationcheck.commands provides ``register(subparsers)``; imports of heavy
# libraries happen inside the command's handler so ``--help`` stays instant.
COMMAND_MODULES = (
    "demo",
    "replay",
    "run",
    "simulate",
    "check",
    "setup",
    "review",
    "forward",
    "plant",
    "eval",
    "train",
    "bench",
    "soak",
    "render",
    "record",
    "teach",
    "alarms",
    "states",
)

SAFETY_NOTE = (
    "Tool enable/inhibit is an error-proofing aid for quality, not a safety function: never rely "
    "on it to protect people; follow local codes and your plant's qualified safety practice."
)
PRIVACY_NOTE = (
    "The camera films the people who work here: tell staff and follow local workplace and "
    "data-protection rules. The live screen is seen on this PC only unless it listens on the "
    "network (then by anyone there with its address and access token). No video is stored while "
    "it runs (a video is written only by 'stationcheck record', to label the station's tool: "
    "delete it when the model is trained); evidence images (off by default) are kept for the "
    "config's log.retention_days (90 unless set)."
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="stationcheck",
        description=(
            "Watches a manual assembly station with one camera, finds the fastening tool's tip, "
            "enables the tool only at the correct next fastener position and logs every step "
            "of every unit."
        ),
        epilog=f"{SAFETY_NOTE} Privacy: {PRIVACY_NOTE}",
    )
    parser.add_argument("--version", action="version", version=f"stationcheck {__version__}")
    parser.add_argument(
        "-v",
        "--verbose",
        action="count",
        default=0,
        help="more log output (-vv for debug); with -v an internal error also prints its traceback",
    )
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(f"stationcheck.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"stationcheck.commands.{name}":
                continue  # not built yet
            raise
        module.register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else EXIT_USAGE
        return EXIT_USAGE if code == 2 else code
    logging.basicConfig(
        level=logging.WARNING - 10 * min(args.verbose, 2),
        format="%(levelname)s %(name)s: %(message)s",
    )
    if args.verbose < 2:  # our own link reports its failures in one line
        logging.getLogger("pymodbus").setLevel(logging.CRITICAL)
    handler = getattr(args, "handler", None)
    if handler is None:
        parser.print_help()
        return EXIT_USAGE
    try:
        return int(handler(args))
    except StationcheckError as exc:
        print(f"stationcheck {args.command}: error: {terminal_text(str(exc))}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print(f"stationcheck {args.command}: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # the reader went away (`stationcheck alarms | head`): not an error
        _quiet_stdout()
        return 0
    except MemoryError:
        print(
            f"stationcheck {args.command}: error: out of memory; the input is too large "
            "for this PC",
            file=sys.stderr,
        )
        return EXIT_INTERNAL
    except Exception as exc:  # a bug: one line, the traceback only with -v or in the log
        where = _where(exc)
        logging.getLogger("stationcheck").debug("internal error", exc_info=True)
        hint = "" if args.verbose else "; run again with -v for the traceback"
        print(
            f"stationcheck {args.command}: internal error: {type(exc).__name__}: "
            f"{terminal_text(first_line(exc))} (at {where}){hint}; please report it",
            file=sys.stderr,
        )
        if args.verbose:
            traceback.print_exc(file=sys.stderr)
        return EXIT_INTERNAL


def _quiet_stdout() -> None:
    """Points stdout at /dev/null so the interpreter's final flush to the closed pipe is silent."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):  # stdout is not a real file (a test's capture)
        pass


def _where(exc: BaseException) -> str:
    """The innermost stationcheck source line the error passed through."""
    frames = traceback.extract_tb(exc.__traceback__)
    ours = [f for f in frames if "stationcheck" in f.filename] or frames
    if not ours:
        return "unknown place"
    last = ours[-1]
    name = last.filename.split("stationcheck/", 1)[-1]
    return f"stationcheck/{name}:{last.lineno}"
