"""``stationcheck demo``: the replay on the bundled sample video (demo data) with the demo
station config, into a fresh output folder: step log, annotated video, observation stream and a
summary (text and JSON). Says where everything is.
"""

from __future__ import annotations

import argparse
import json
import sys
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

from stationcheck.demo_station.files import (
    DEMO_CONFIG,
    EXPECTED_NAME,
    INPUTS_NAME,
    SAMPLE_DIR,
    TRUTH_NAME,
    VIDEO_NAME,
)

if TYPE_CHECKING:
    from stationcheck.pipeline.replay_report import ReplayReport

ANNOTATE_EVERY = 2  # a 15 fps annotated video keeps the demo well under a minute
DEMO_NOTE = (
    "DEMO DATA: an invented pump end-cover station, its units and tightening results; "
    "no real station, product or person."
)


def command_words() -> str:
    """How to call stationcheck again so that it works as printed in a fresh shell: the
    full path of the script that is running, else this Python with ``-m stationcheck``."""
    import shlex

    script = Path(sys.argv[0])
    if script.name == "stationcheck" and script.is_file():
        return shlex.quote(str(script.resolve()))
    return f"{shlex.quote(sys.executable)} -m stationcheck"


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "demo",
        help="replay the bundled sample video of the demo station (demo data)",
        description=(
            "Runs the whole pipeline on the bundled sample video of an invented pump "
            "end-cover station (demo data) into a new output folder: step log, annotated "
            "video, observation stream, summary. Nothing outside that folder is written."
        ),
    )
    p.add_argument(
        "--out", type=Path, help="output folder, new or empty (default: ./stationcheck-demo/<time>)"
    )
    p.add_argument("--threads", type=int, help="model threads (default: the config's)")
    p.add_argument(
        "--json", action="store_true", help="print one JSON object, as 'replay --json' does"
    )
    from stationcheck.web.operator.options import add_screen_arguments

    add_screen_arguments(p, replay=True)
    p.set_defaults(handler=run)


def fresh_folder(out: Path | None) -> Path:
    """The output folder: ``out`` if new or empty; by default a new timestamped folder."""
    from stationcheck.errors import InputFileError

    if out is None:
        base = Path.cwd() / "stationcheck-demo" / datetime.now().strftime("%Y%m%d-%H%M%S")
        out, number = base, 2
        while out.exists():
            out = base.with_name(f"{base.name}-{number}")
            number += 1
    elif out.exists() and (not out.is_dir() or any(out.iterdir())):
        raise InputFileError(f"output folder {out} is not empty; give a new or empty folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputFileError(f"cannot create the output folder {out}: {exc}") from exc
    return out


def run(args: argparse.Namespace) -> int:
    from stationcheck.cli import SAFETY_NOTE
    from stationcheck.commands.replay import ProgressLine
    from stationcheck.errors import InputFileError
    from stationcheck.pipeline.session import ReplaySettings, run_replay
    from stationcheck.vision.detector import bundled_model_path

    video = SAMPLE_DIR / VIDEO_NAME
    for needed in (video, SAMPLE_DIR / INPUTS_NAME, SAMPLE_DIR / EXPECTED_NAME, DEMO_CONFIG):
        if not needed.is_file():
            raise InputFileError(
                f"demo file missing: {needed} (regenerate the sample with tools/render_sample_video)"
            )
    if args.threads is not None and args.threads < 1:
        raise InputFileError(f"--threads must be >= 1, got {args.threads}")
    out = fresh_folder(args.out)
    has_model = bundled_model_path().is_file()
    if not args.json:
        print(f"Safety: {SAFETY_NOTE}")
        print(f"Demo data: an invented pump end-cover station; writing to {out}")
        if not has_model:
            print(
                "NOTE: the bundled model file is missing; this demo uses the ground-truth "
                "keypoints instead of the detector."
            )
    settings = ReplaySettings(
        config_path=DEMO_CONFIG,
        log_path=out / "step-log.sqlite",
        video=video,
        inputs=SAMPLE_DIR / INPUTS_NAME,
        expected=SAMPLE_DIR / EXPECTED_NAME,
        truth=SAMPLE_DIR / TRUTH_NAME,
        annotate=out / "annotated.mp4",
        annotate_every=ANNOTATE_EVERY,
        record_observations=out / "observations.jsonl",
        threads=args.threads,
        detector="model" if has_model else "truth",
    )
    progress = None if args.json else ProgressLine("demo")
    from stationcheck.web.operator.screen import command_screen

    with command_screen(args, DEMO_CONFIG, "replay") as screen:
        if screen.url is not None:
            print(f"Operator screen: {screen.url}", file=sys.stderr, flush=True)
        report = run_replay(settings, progress, screen.watchers)
        _tell(report, out, args.json)
        screen.hold()
    return 0


def _tell(report: ReplayReport, out: Path, as_json: bool) -> None:
    """The summary into the output folder and to the console."""
    from stationcheck.cli import SAFETY_NOTE

    summary = report.to_json()
    summary["out_dir"] = str(out)
    summary["demo_data"] = True
    summary["demo_note"] = DEMO_NOTE
    summary["safety"] = SAFETY_NOTE
    (out / "summary.json").write_text(json.dumps(summary, indent=2) + "\n", encoding="utf-8")
    lines = report.text_lines()
    (out / "summary.txt").write_text(
        "\n".join([f"Safety: {SAFETY_NOTE}", DEMO_NOTE, *lines]) + "\n", encoding="utf-8"
    )
    if as_json:
        print(json.dumps(summary), flush=True)
        return
    print(DEMO_NOTE)
    for line in lines:
        print(line)
    print(f"\nEverything is in {out}:")
    for name, what in (
        (
            "step-log.sqlite",
            (
                "the step log (SQLite): every event, units, steps, alarms; "
                "each unit marked as demo data"
            ),
        ),
        (
            "annotated.mp4",
            (
                "the video with zones, tip, enable state and steps drawn "
                f"(one frame in {ANNOTATE_EVERY})"
            ),
        ),
        ("observations.jsonl", "what the sequencer saw (replayed without the video below)"),
        ("summary.txt", "this summary"),
        ("summary.json", "the same as JSON"),
    ):
        print(f"  {name:<19} {what}")
    import shlex

    me = command_words()
    print("\nNext (each works as printed, from any folder):")
    for what, command in (
        (
            "look through the units in the browser",
            f"{me} review {shlex.quote(str(out / 'step-log.sqlite'))}",
        ),
        ("watch the run on the operator screen", f"{me} demo --screen"),
        (
            "replay the decisions without the video",
            (
                f"{me} replay --observations {shlex.quote(str(out / 'observations.jsonl'))} "
                f"--config {shlex.quote(str(DEMO_CONFIG))} "
                f"--log {shlex.quote(str(out / 'replayed.sqlite'))}"
            ),
        ),
        ("draw zones on the demo station", f"{me} setup {shlex.quote(str(DEMO_CONFIG))}"),
    ):
        print(f"  {what}:\n    {command}")
    sys.stdout.flush()
