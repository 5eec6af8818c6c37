"""``stationcheck replay``: the full pipeline on a recorded video, or on a recorded
observation stream, into a fresh step log; per-unit summary; optional comparison with
expected decisions, annotated video and observation recording.

Exit codes: 0 done (and, with --expected, everything matched and no false enable); 1 the
run finished but differs from the expected decisions or enabled the tool away from the
target; 2 bad config; 3 missing or unreadable input file (video, inputs, expectations); 4 bad
model file; 6 step-log error; 64 bad command line.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from stationcheck.pipeline.replay_report import ReplayReport
    from stationcheck.pipeline.session import ReplaySettings

EXIT_DIFFERS = 1
PROGRESS_EVERY_S = 3.0

_EPILOG = """\
station inputs: JSON lines with t_s and kind (unit_started, tool_running, tightening_result,
operator_ack, reset, abort, link_status). An input stamped t_s is applied just before the first
frame whose time is at or after t_s; inputs up to one frame after the last frame are applied
after it, later ones (beyond --frames) are left out.

exit codes: 0 done (with --expected: no mismatch and no false enable), 1 differs from the
expected decisions or enabled the tool away from the target, 2 bad config, 3 missing or
unreadable input file, 4 bad model file, 6 step-log error, 64 bad command line.
"""


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "replay",
        help="run the full pipeline on a recorded video (or observation stream)",
        description=(
            "Runs frame source -> keypoint detector -> tracker -> zones -> image judgements -> "
            "sequencer -> step log on a recorded station video with its station inputs, prints "
            "a per-unit summary and the frames/s of the whole path, and can compare the "
            "decisions with expected ones."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_replay_arguments(p)
    from stationcheck.web.operator.options import add_screen_arguments

    add_screen_arguments(p, replay=True)
    p.set_defaults(handler=run)


def add_replay_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "video",
        metavar="VIDEO",
        nargs="?",
        type=Path,
        help="recorded station video (leave out with --observations)",
    )
    p.add_argument("--config", required=True, type=Path, help="station config (.yaml)")
    p.add_argument("--inputs", type=Path, help="station inputs (.jsonl), needed with VIDEO")
    p.add_argument(
        "--observations", type=Path, help="replay a recorded observation stream instead of a video"
    )
    p.add_argument("--expected", type=Path, help="expected decisions (.jsonl) to compare with")
    p.add_argument(
        "--truth",
        type=Path,
        help="per-frame ground truth (.csv) for counting false enables (default: "
        "X_truth.csv beside X_expected.jsonl, if there)",
    )
    p.add_argument(
        "--log",
        type=Path,
        help="step log to write (a new file; default: stationcheck-replay-<time>.sqlite here)",
    )
    p.add_argument(
        "--annotate",
        type=Path,
        metavar="OUT.mp4",
        help="also write the video with zones, tip and decisions drawn (it shows the "
        "people filmed: keep it only as long as needed, following local "
        "workplace and data-protection rules)",
    )
    p.add_argument(
        "--annotate-every",
        type=int,
        default=1,
        metavar="N",
        help="draw every N-th frame only (a lighter video; default: every frame)",
    )
    p.add_argument(
        "--record-observations",
        type=Path,
        metavar="OUT.jsonl",
        help="record every observation the sequencer sees",
    )
    p.add_argument("--threads", type=int, help="model threads (default: the config's)")
    p.add_argument("--model", type=Path, help="coarse .onnx model (default: the config's)")
    p.add_argument(
        "--detector",
        choices=("model", "truth"),
        default="model",
        help="'truth' answers with the ground-truth keypoints (needs --truth) to "
        "check decisions without a model (default: model)",
    )
    p.add_argument(
        "--judgements",
        choices=("image", "truth"),
        default="image",
        help="'truth' reads bin activity, pin and camera pose from the ground truth "
        "(default: image)",
    )
    p.add_argument("--first-frame", type=int, default=0, help="start at this frame")
    p.add_argument("--frames", type=int, help="process at most this many frames")
    p.add_argument(
        "--edge-tolerance",
        type=int,
        default=3,
        metavar="FRAMES",
        help="largest offset of a matching enable edge (default: %(default)s)",
    )
    p.add_argument(
        "--json", action="store_true", help="print one JSON object (no progress, no table)"
    )


def default_log_path(folder: Path, stem: str = "stationcheck-replay") -> Path:
    stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
    path = folder / f"{stem}-{stamp}.sqlite"
    number = 2
    while path.exists():
        path = folder / f"{stem}-{stamp}-{number}.sqlite"
        number += 1
    return path


def usage_problem(args: argparse.Namespace) -> str | None:
    """What is wrong with the combination of arguments, if anything."""
    if args.video is not None and args.observations is not None:
        return "give either VIDEO or --observations, not both"
    if args.video is None and args.observations is None:
        return "give a VIDEO (with --inputs) or --observations"
    if args.video is not None and args.inputs is None:
        return "a VIDEO needs its station inputs (--inputs)"
    if args.observations is not None and args.annotate is not None:
        return "--annotate needs the VIDEO, not --observations"
    if args.observations is not None and (args.screen or args.pace is not None):
        return "--screen and --pace need the VIDEO, not --observations"
    for name in ("threads", "frames", "annotate_every"):
        value = getattr(args, name)
        if value is not None and value < 1:
            return f"--{name.replace('_', '-')} must be >= 1, got {value}"
    if args.first_frame < 0 or args.edge_tolerance < 0:
        return "--first-frame and --edge-tolerance must be >= 0"
    return None


def settings_from_args(args: argparse.Namespace, log_path: Path) -> ReplaySettings:
    from stationcheck.pipeline.session import ReplaySettings

    return ReplaySettings(
        config_path=args.config,
        log_path=log_path,
        video=args.video,
        inputs=args.inputs,
        observations=args.observations,
        expected=args.expected,
        truth=args.truth,
        annotate=args.annotate,
        annotate_every=args.annotate_every,
        record_observations=args.record_observations,
        model_path=args.model,
        threads=args.threads,
        detector=args.detector,
        judges=args.judgements,
        first_frame=args.first_frame,
        max_frames=args.frames,
        edge_tolerance_frames=args.edge_tolerance,
    )


class ProgressLine:
    """A line on stderr every few seconds: frames done, rate, time left."""

    def __init__(self, label: str, every_s: float = PROGRESS_EVERY_S) -> None:
        self.label = label
        self.every_s = every_s
        self.started = time.perf_counter()
        self.last = self.started

    def __call__(self, done: int, total: int | None) -> None:
        now = time.perf_counter()
        if now - self.last < self.every_s:
            return
        self.last = now
        rate = done / max(now - self.started, 1e-9)
        if total:
            left = (total - done) / rate if rate > 0 else 0.0
            print(
                f"{self.label}: {done}/{total} ({100 * done / total:.0f} %), "
                f"{rate:.0f}/s, about {left:.0f} s left",
                file=sys.stderr,
                flush=True,
            )
        else:
            print(f"{self.label}: {done}, {rate:.0f}/s", file=sys.stderr, flush=True)


def exit_code(report: ReplayReport) -> int:
    comparison, false_enables = report.comparison, report.false_enables
    differs = comparison is not None and bool(comparison.mismatches)
    enabled_wrongly = false_enables is not None and false_enables.frames > 0
    return EXIT_DIFFERS if differs or enabled_wrongly else 0


def print_report(report: ReplayReport, as_json: bool, extra: dict[str, Any] | None = None) -> None:
    if as_json:
        data = report.to_json()
        data.update(extra or {})
        print(json.dumps(data))
        return
    for line in report.text_lines():
        print(line)


def run(args: argparse.Namespace) -> int:
    from stationcheck.cli import EXIT_USAGE
    from stationcheck.pipeline.session import run_replay
    from stationcheck.web.operator.screen import command_screen

    problem = usage_problem(args)
    if problem is not None:
        print(f"stationcheck replay: error: {problem}", file=sys.stderr)
        return EXIT_USAGE
    log_path = args.log if args.log is not None else default_log_path(Path.cwd())
    settings = settings_from_args(args, log_path)
    progress = None if args.json else ProgressLine("replay")
    if args.annotate is not None:
        from stationcheck.cli import PRIVACY_NOTE

        print(
            f"Privacy: {args.annotate} shows the people filmed in the video; it is kept "
            f"until you delete it. {PRIVACY_NOTE}",
            file=sys.stderr,
            flush=True,
        )
    with command_screen(args, args.config, "replay") as screen:
        if screen.url is not None:
            print(f"Operator screen: {screen.url}", file=sys.stderr, flush=True)
        report = run_replay(settings, progress, screen.watchers)
        print_report(report, args.json)
        screen.hold()
    return exit_code(report)
