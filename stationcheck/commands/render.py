"""``stationcheck render``: the demo station's sample video and synthetic training frames."""

from __future__ import annotations

import argparse
import time
from pathlib import Path

from stationcheck.demo_station.files import SAMPLE_DIR, VIDEO_NAME


def _positive_int(text: str) -> int:
    value = int(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be >= 1, got {value}")
    return value


def _fraction(text: str) -> float:
    value = float(text)
    if not 0.0 <= value <= 1.0:
        raise argparse.ArgumentTypeError(f"must be in [0, 1], got {value}")
    return value


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "render",
        help="render the demo station's sample video or training frames (demo data)",
        description=(
            "Renders the invented demo station: 'video' regenerates the sample video with its "
            "ground truth, station inputs and expected decisions from the scene script; "
            "'training' writes random labelled frames as a COCO keypoint dataset."
        ),
    )
    sub = p.add_subparsers(dest="what", metavar="WHAT", required=True)
    video = sub.add_parser("video", help="regenerate the sample video and its sidecar files")
    video.add_argument(
        "--out",
        type=Path,
        default=SAMPLE_DIR,
        help="output directory (default: sample_video/)",
    )
    video.add_argument(
        "--seed",
        type=int,
        default=None,
        help="override the scene script's seed (default: the script's)",
    )
    video.add_argument(
        "--script",
        type=Path,
        default=None,
        help="scene script YAML (default: sample_video/demo_script.yaml)",
    )
    video.add_argument(
        "--config",
        type=Path,
        default=None,
        help="station config (default: configs/demo_station.yaml)",
    )
    video.add_argument(
        "--no-reference",
        action="store_true",
        help="do not rewrite configs/demo_station/reference.png",
    )
    video.set_defaults(handler=run_video)
    training = sub.add_parser("training", help="write random labelled frames (COCO keypoints)")
    training.add_argument("--out", type=Path, required=True, help="output directory")
    training.add_argument("--count", type=_positive_int, required=True, help="number of frames")
    training.add_argument("--seed", type=int, default=0, help="random seed (default: 0)")
    training.add_argument(
        "--station-fraction",
        type=_fraction,
        default=0.5,
        help="share of frames showing the demo station (default: 0.5)",
    )
    training.set_defaults(handler=run_training)


def run_video(args: argparse.Namespace) -> int:
    from stationcheck.demo_station import sample_video as sv
    from stationcheck.errors import InputFileError

    out: Path = args.out
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputFileError(f"cannot create {out}: {exc}") from exc
    started = time.perf_counter()
    production = sv.produce(
        args.script or sv.DEFAULT_SCRIPT, args.config or sv.DEFAULT_CONFIG, seed=args.seed
    )
    chor = production.choreography
    print(f"rendering {chor.frame_count} frames to {out / VIDEO_NAME} ...", flush=True)

    def progress(frame: int, total: int) -> None:
        print(f"  frame {frame}/{total}", flush=True)

    result = sv.write_sample(
        production,
        out,
        progress=progress,
        reference=None if args.no_reference else sv.DEFAULT_REFERENCE,
    )
    units = ", ".join(f"{u.serial}{' (rework)' if u.rework else ''}" for u in chor.units)
    print(f"frames    {chor.frame_count} at {chor.fps:g} fps ({chor.frame_count / chor.fps:.1f} s)")
    print(f"units     {len(chor.units)}: {units}")
    ms = result.render_ms_per_frame
    print(f"video     {result.video_bytes / 1e6:.1f} MB  ({ms:.1f} ms CPU per frame to render)")
    print(f"sidecars  {', '.join(result.sidecars)}")
    print(f"expected  {len(production.decisions)} decisions; inputs {len(chor.inputs)}")
    print(f"took      {time.perf_counter() - started:.0f} s")
    return 0


def run_training(args: argparse.Namespace) -> int:
    from stationcheck.demo_station.training import write_coco_dataset

    started = time.perf_counter()
    path = write_coco_dataset(
        args.out, args.count, args.seed, station_fraction=args.station_fraction
    )
    took = time.perf_counter() - started
    per_frame_ms = 1000 * took / args.count
    print(f"wrote {args.count} frames and {path} in {took:.0f} s ({per_frame_ms:.1f} ms/frame)")
    return 0
