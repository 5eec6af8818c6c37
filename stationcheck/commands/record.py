"""``stationcheck record``: record a video of the station, for labelling the station's tool.

Exit codes: 0 recorded (Ctrl-C stops and keeps nothing, also 0); 3 the source cannot be
opened, gives no frame, or the file cannot be written; 64 bad command line.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

DEFAULT_SECONDS = 180.0


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "record",
        help="record a video of the station (for labelling its tool); explicit only",
        description=(
            "Records frames from a camera index, a stream URL or a video file into an .mp4 file "
            "(mp4v) inside --root, for the setup screen's Label tab. Record the operator working "
            "a few units normally: every fastener position, the bins, fast moves, the tool put "
            "down and out of view. stationcheck stores no video unless you run this command; "
            "tell the people filmed and delete the file when the labels are made."
        ),
        epilog=_privacy_epilog(),
    )
    p.add_argument(
        "--source", required=True, help="camera index (0, 1, ...), stream URL or video file"
    )
    p.add_argument("--out", required=True, type=Path, help="video file to write (.mp4)")
    length = p.add_mutually_exclusive_group()
    length.add_argument(
        "--seconds",
        type=float,
        default=None,
        help=f"how long to record (default {DEFAULT_SECONDS:g} s)",
    )
    length.add_argument("--frames", type=int, default=None, help="how many frames to record")
    p.add_argument(
        "--root",
        type=Path,
        default=None,
        help="folder the output (and a video file source) must lie in (default: the current "
        "folder)",
    )
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    p.set_defaults(handler=run)


def _privacy_epilog() -> str:
    from stationcheck.cli import PRIVACY_NOTE

    return f"Privacy: {PRIVACY_NOTE}"


def _inside(path: Path, root: Path, what: str) -> Path:
    from stationcheck.errors import InputFileError

    resolved = path.resolve()
    if not resolved.is_relative_to(root):
        raise InputFileError(f"{what} {path} ({resolved}) lies outside --root {root}")
    return resolved


def run(args: argparse.Namespace) -> int:
    from stationcheck.cli import PRIVACY_NOTE
    from stationcheck.errors import InputFileError
    from stationcheck.sources.frame_source import FrameSource
    from stationcheck.sources.kinds import parse_source
    from stationcheck.sources.recorder import VIDEO_SUFFIX, record

    root = (args.root or Path.cwd()).resolve()
    if not root.is_dir():
        raise InputFileError(f"--root {args.root}: no such folder")
    if (
        args.frames is not None
        and args.frames < 1
        or args.seconds is not None
        and args.seconds <= 0
    ):
        print("stationcheck record: error: --frames and --seconds must be > 0", file=sys.stderr)
        return 64
    target = _inside(args.out, root, "--out")
    if target.suffix.lower() != VIDEO_SUFFIX:
        print(f"stationcheck record: error: --out must end in {VIDEO_SUFFIX}", file=sys.stderr)
        return 64
    if target.exists() and not args.overwrite:
        raise InputFileError(f"{args.out} exists already (add --overwrite to replace it)")
    where = parse_source(args.source)
    source: FrameSource
    if isinstance(where, Path):
        from stationcheck.sources.video_file import VideoFileSource

        source = VideoFileSource(_inside(where, root, "--source"))
    else:
        from stationcheck.sources.camera import CaptureSource

        source = CaptureSource(where)
    seconds = args.seconds if args.seconds is not None else DEFAULT_SECONDS
    max_frames = args.frames if args.frames is not None else max(1, round(seconds * source.fps))
    print(f"Privacy: {PRIVACY_NOTE}", flush=True)
    print(
        f"Recording {max_frames} frames from {source.name} to {target} (Ctrl-C stops)", flush=True
    )

    def progress(count: int) -> None:
        if count % max(1, round(source.fps * 10)) == 0:
            print(f"  {count} of {max_frames} frames", flush=True)

    try:
        done = record(source, target, max_frames, progress)
    except KeyboardInterrupt:
        print("stopped: nothing kept (the recording was not complete)", flush=True)
        return 0
    finally:
        source.close()
    print(
        f"recorded {done.frames} frames ({done.frames / done.fps:.1f} s at {done.fps:g} "
        f"frames/s, {done.width_px}x{done.height_px}) to {done.path}; open it in the setup "
        "screen's Label tab",
        flush=True,
    )
    return 0
