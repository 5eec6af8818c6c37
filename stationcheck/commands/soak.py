"""``stationcheck soak``: the fault soak (real frame path, replayed footage, injected faults).

Exit codes: 0 no false enable and every fault inhibited within the bound; 1 otherwise; 3 the
footage files cannot be read; 64 bad command line.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
from pathlib import Path

from stationcheck.demo_station.files import DEMO_CONFIG, SAMPLE_INPUTS, SAMPLE_TRUTH, SAMPLE_VIDEO


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "soak",
        help="fault soak: faults injected into the real frame path, enable checked every frame",
        description=(
            "Replays recorded footage (default: the sample video's detector answers, station "
            "inputs and ground truth) through the tracker, zones, frozen-picture check, image "
            "judgements and sequencer, looped, with faults injected at random times and lengths "
            "(frozen image, stall, black frames, heavy blur, occluded tip, camera moved, NaN "
            "model output, link drop, PLC freeze, tool running stuck, repeated or jumping "
            "result sequence, reset during a run). Prints frames, false enables and the time "
            "from each fault becoming detectable to the enable being off, per fault kind."
        ),
    )
    p.add_argument("--frames", type=int, default=100_000, help="frame slots (default 100000)")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument(
        "--keypoints",
        choices=("model", "truth"),
        default="model",
        help="detector answers: the station's model on every frame (recorded once, "
        "cached) or the ground truth",
    )
    p.add_argument(
        "--bound-ms",
        type=float,
        default=100.0,
        help="the enable must be off this long after a fault is detectable",
    )
    p.add_argument("--config", type=Path, default=DEMO_CONFIG)
    p.add_argument("--video", type=Path, default=SAMPLE_VIDEO)
    p.add_argument("--inputs", type=Path, default=SAMPLE_INPUTS)
    p.add_argument("--truth", type=Path, default=SAMPLE_TRUTH)
    p.add_argument(
        "--still",
        action="store_true",
        help="also measure the frozen-picture check on the sample video and on a "
        "minute of the empty demo station (no false alarm allowed)",
    )
    p.add_argument("--json", action="store_true", help="print the figures as one JSON object")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.soak.footage import load_footage
    from stationcheck.soak.runner import Soak

    if args.frames < 1 or args.bound_ms <= 0:
        print("stationcheck soak: error: --frames and --bound-ms must be positive", file=sys.stderr)
        return 64
    logging.getLogger("stationcheck.pipeline.frame_path").setLevel(logging.ERROR)
    footage = load_footage(args.config, args.video, args.inputs, args.truth, args.keypoints)

    def progress(slot: int) -> None:
        if not args.json and slot:
            print(f"  ... {slot} frames", file=sys.stderr, flush=True)

    report = Soak(footage, seed=args.seed, bound_ms=args.bound_ms).run(args.frames, progress)
    result = report.to_dict()
    still = _still(args.video, footage.stale_frame_ms) if args.still else None
    if still is not None:
        result["still_scenes"] = still
    if args.json:
        print(json.dumps(result, indent=2))
    else:
        print("\n".join(report.lines()))
        for name, row in (still or {}).items():
            print(
                f"frozen-picture check on {name}: {row['frames']} frames, longest unchanged "
                f"{row['worst_frozen_ms']:.1f} ms (alarm at {footage.stale_frame_ms:.0f} ms), "
                f"noise floor {row['noise_floor']:.3f}, smallest change {row['min_change']:.3f} "
                f"vs threshold {row['threshold']:.3f}"
            )
    still_ok = still is None or all(
        r["worst_frozen_ms"] < footage.stale_frame_ms for r in still.values()
    )
    return 0 if report.passed and still_ok else 1


def _still(video: Path, stale_ms: float) -> dict[str, dict[str, float]]:
    from stationcheck.demo_station.empty_station import empty_station_frames
    from stationcheck.sources.video_file import VideoFileSource
    from stationcheck.vision.frozen_image import FrozenImageWatch

    out = {}
    for name, frames in (
        ("the sample video", VideoFileSource(video)),
        ("a minute of the empty station", empty_station_frames(60.0)),
    ):
        watch, worst, smallest, count = FrozenImageWatch(), 0.0, float("inf"), 0
        for frame in frames:
            worst = max(worst, watch.see(frame))
            if count:
                smallest = min(smallest, watch.last_change)
            count += 1
        out[name] = {
            "frames": count,
            "worst_frozen_ms": worst,
            "noise_floor": watch.noise_floor or 0.0,
            "threshold": watch.threshold,
            "min_change": smallest,
        }
    return out
