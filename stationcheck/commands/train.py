"""``stationcheck train``: trains the two-stage tool keypoint model and writes the bundle."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from stationcheck.errors import InputFileError


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "train",
        help="train the tool keypoint model on the CPU and export it to ONNX",
        description=(
            "Trains the coarse and refine keypoint networks (tip, rear) together, by default on "
            "the demo renderer's random training frames, or on your own COCO keypoint dataset "
            "(--coco/--images). Stops at --steps or --minutes, checkpoints as it goes, and "
            "writes <name>.coarse.onnx and <name>.refine.onnx with calibrated scores. With "
            "--station: fine-tunes the station's model on the frames labelled in its setup "
            "screen, writes it into the station folder, points the config at it and writes its "
            "fitness report. Needs the 'train' extra (torch)."
        ),
    )
    p.add_argument(
        "--out",
        type=Path,
        default=Path("trained_model"),
        help="directory for the ONNX files and the checkpoint (default: %(default)s)",
    )
    p.add_argument(
        "--station",
        type=Path,
        default=None,
        metavar="CONFIG",
        help="fine-tune this station's model on its labelled frames (<station folder>/labels/)",
    )
    p.add_argument(
        "--progress-json",
        action="store_true",
        help="with --station: one JSON object per line on stdout (phase, step, time left)",
    )
    p.add_argument(
        "--steps", type=int, default=None, help="step budget (default: 3000; --station: 1500)"
    )
    p.add_argument(
        "--minutes",
        type=float,
        default=None,
        help="time budget in minutes (stops at whichever budget comes first; --station: 8.5)",
    )
    p.add_argument("--seed", type=int, default=0, help="random seed (default: %(default)s)")
    p.add_argument("--batch-size", type=int, default=32, help="default: %(default)s")
    p.add_argument(
        "--learning-rate",
        type=float,
        default=3e-3,
        help="peak AdamW learning rate; lower it to refine a model --from one (default: %(default)s)",
    )
    p.add_argument(
        "--coco",
        type=Path,
        default=None,
        help="COCO keypoint JSON with a category naming 'tip' and 'rear'",
    )
    p.add_argument("--images", type=Path, default=None, help="image directory for --coco")
    p.add_argument(
        "--demo-mix",
        choices=("randomised", "own-tool", "mostly-own-tool"),
        default="randomised",
        help="demo renderer frames: 'randomised' (random scenes and the demo station, often "
        "with other tools) or 'own-tool' (as many again of the demo station's own tool, about "
        "half of all frames) or 'mostly-own-tool' (about 7 in 10 frames, for a last low-rate "
        "stage) (default: %(default)s)",
    )
    p.add_argument(
        "--checkpoint", type=Path, default=None, help="checkpoint file (default: OUT/checkpoint.pt)"
    )
    p.add_argument("--resume", action="store_true", help="continue from the checkpoint")
    p.add_argument(
        "--from",
        dest="start_from",
        default=None,
        metavar="MODEL",
        help="start from this coarse model's weights ('bundled' for the shipped model) "
        "instead of random ones",
    )
    p.add_argument("--threads", type=int, default=1, help="torch threads (default: %(default)s)")
    p.add_argument(
        "--workers", type=int, default=1, help="data worker processes (default: %(default)s)"
    )
    p.add_argument(
        "--calibration-frames",
        type=int,
        default=400,
        help="held-out frames for score calibration (default: %(default)s)",
    )
    p.add_argument(
        "--rendered-share",
        type=float,
        default=None,
        help="with --station: share of the demo renderer's frames mixed into the station's own "
        "so the model does not forget (default: 0.3)",
    )
    p.add_argument(
        "--motion-frames",
        type=int,
        default=400,
        help="rendered frames of fast moves to measure the motion lead on (default: %(default)s)",
    )
    p.add_argument("--name", default="tool_tip", help="model file name stem (default: %(default)s)")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    if args.station is not None:
        from stationcheck.commands.train_station import train_station

        if args.coco is not None or args.images is not None or args.resume:
            raise InputFileError(
                "--station reads the station's own labels; leave out --coco, --images and --resume"
            )
        return train_station(args)
    if args.progress_json:
        raise InputFileError("--progress-json goes with --station")
    import stationcheck.training  # noqa: F401  (raises the install hint without torch)
    from stationcheck.training.bundle import write_bundle
    from stationcheck.training.loop import Progress, TrainConfig, train
    from stationcheck.training.sources import coco_sources, demo_moving_sample, demo_sources

    if (args.coco is None) != (args.images is None):
        raise InputFileError("--coco and --images go together")
    moving_sample = None
    if args.coco is not None:
        source, holdout = coco_sources(args.coco, args.images, args.seed)
    else:
        from stationcheck.demo_station import training as demo_training

        source, holdout = demo_sources(demo_training, args.demo_mix)
        moving_sample = demo_moving_sample(demo_training)
    config = TrainConfig(
        seed=args.seed,
        max_steps=args.steps if args.steps is not None else 3000,
        max_minutes=args.minutes,
        batch_size=args.batch_size,
        learning_rate=args.learning_rate,
        threads=args.threads,
        workers=args.workers,
        model_name=args.name,
        start_from=start_from_path(args.start_from),
    )
    checkpoint = args.checkpoint or args.out / "checkpoint.pt"

    def show(p: Progress) -> None:
        left = p.elapsed_s / max(p.step, 1) * (p.max_steps - p.step)
        print(
            f"step {p.step}/{p.max_steps}  loss {p.loss:.2f}  {p.images_per_s:.0f} img/s  "
            f"{p.elapsed_s / 60:.1f} min  (~{left / 60:.0f} min left)",
            file=sys.stderr,
            flush=True,
        )

    result = train(source, config, checkpoint=checkpoint, resume=args.resume, on_progress=show)
    print(
        f"trained {result.steps} steps in {result.elapsed_s / 60:.1f} min; calibrating scores "
        f"on {args.calibration_frames} held-out frames",
        file=sys.stderr,
        flush=True,
    )
    path = write_bundle(
        result,
        config,
        args.out,
        holdout,
        args.calibration_frames,
        moving_sample=moving_sample,
        motion_frames=args.motion_frames,
    )
    print(f"wrote {path} and {path.parent / config.coarse_info().refine_model}")
    return 0


def start_from_path(value: str | None) -> Path | None:
    if value is None:
        return None
    if value == "bundled":
        from stationcheck.vision.detector import bundled_model_path

        return bundled_model_path()
    path = Path(value)
    if not path.is_file():
        raise InputFileError(f"--from {value}: no such model file ({path.resolve()})")
    return path
