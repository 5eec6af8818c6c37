"""``stationcheck eval``: accuracy of a keypoint model against labelled frames."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from stationcheck.demo_station.files import SAMPLE_TRUTH, SAMPLE_VIDEO
from stationcheck.errors import InputFileError


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "eval",
        help="measure a keypoint model against labelled frames",
        description=(
            "Runs the detector on labelled frames (a COCO keypoint dataset, or a video with its "
            "per-frame ground-truth CSV) and reports tip error median/p95 in frame pixels, PCK "
            "at 2/5/10 px, miss and false detection rates, and COCO OKS AP (pycocotools). "
            "Without arguments: the bundled model on the sample video. With --station: the "
            "station's model on its held-out labelled frames, as its fitness report "
            "(<station folder>/model/fitness.json) with a verdict. With --looks: the "
            "model on short rendered clips of camera looks kept out of training (a dim lamp, "
            "sensor noise, JPEG 15, zoom, roll, other tool colours, an unseen tool)."
        ),
    )
    p.add_argument(
        "--model",
        type=Path,
        default=None,
        help="coarse .onnx model (default: the bundled demo model)",
    )
    p.add_argument(
        "--station",
        type=Path,
        default=None,
        metavar="CONFIG",
        help="the station's fitness report: its model on its held-out labelled frames",
    )
    p.add_argument("--coco", type=Path, default=None, help="COCO keypoint JSON")
    p.add_argument("--images", type=Path, default=None, help="image directory for --coco")
    p.add_argument("--video", type=Path, default=None, help="video file")
    p.add_argument("--truth", type=Path, default=None, help="per-frame ground-truth CSV")
    p.add_argument(
        "--every",
        type=int,
        default=1,
        help="evaluate every N-th video frame (default: %(default)s)",
    )
    p.add_argument(
        "--min-score",
        type=float,
        default=0.5,
        help="score at which a keypoint counts as detected (default: %(default)s)",
    )
    p.add_argument(
        "--looks",
        action="store_true",
        help="measure on rendered clips of the held-out looks instead (demo data; minutes)",
    )
    p.add_argument(
        "--look",
        action="append",
        default=None,
        metavar="NAME",
        help="with --looks: only this look (repeatable), e.g. 'JPEG 15'",
    )
    p.add_argument(
        "--look-frames",
        type=int,
        default=None,
        metavar="N",
        help="with --looks: only the first N frames of each clip",
    )
    p.add_argument("--threads", type=int, default=1, help="onnxruntime threads (default: 1)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.evaluation.accuracy_report import evaluate
    from stationcheck.evaluation.coco_ap import require_pycocotools
    from stationcheck.evaluation.truth import read_coco_frames, read_video_frames
    from stationcheck.vision.detector import load_detector

    require_pycocotools()  # before any frame is read: exit 7 at once, not after the whole run
    if args.station is not None:
        return _run_station(args)
    if args.looks:
        from stationcheck.commands.eval_looks import run_looks

        if args.coco or args.images or args.video or args.truth:
            raise InputFileError("--looks renders its own clips; drop --coco/--video")
        if args.look_frames is not None and args.look_frames < 1:
            raise InputFileError(f"--look-frames must be >= 1, got {args.look_frames}")
        detector = load_detector(args.model, threads=args.threads)
        return run_looks(detector, args.min_score, args.json, args.look, args.look_frames)
    if args.look or args.look_frames is not None:
        raise InputFileError("--look and --look-frames go with --looks")
    if args.coco is not None or args.images is not None:
        if args.coco is None or args.images is None or args.video or args.truth:
            raise InputFileError("use --coco with --images, or --video with --truth")
        frames = read_coco_frames(args.coco, args.images)
    else:
        if (args.video is None) != (args.truth is None):
            raise InputFileError("--video and --truth go together")
        video = args.video or SAMPLE_VIDEO
        truth = args.truth or SAMPLE_TRUTH
        for path in (video, truth):
            if not path.is_file():
                raise InputFileError(f"file not found: {path}")
        if args.every < 1:
            raise InputFileError(f"--every must be >= 1, got {args.every}")
        frames = read_video_frames(video, truth, every=args.every)
    detector = load_detector(args.model, threads=args.threads)

    def show(count: int) -> None:
        if count % 500 == 0:
            print(f"evaluated {count} frames ...", file=sys.stderr, flush=True)

    report = evaluate(detector, frames, min_score=args.min_score, on_frame=show)
    figures = report.as_dict()
    if args.json:
        print(json.dumps(figures))
        return 0
    m = report.metrics
    lines = [
        (
            f"frames {m.frames} (tip visible {m.visible_frames}, hidden {m.hidden_frames}, "
            f"absent {m.absent_frames}); detected = score >= {args.min_score:g}"
        ),
        (
            f"tip error      median {m.tip_median_px:.2f} px   p95 {m.tip_p95_px:.2f} px   "
            f"max {m.tip_max_px:.2f} px"
        ),
        f"PCK            2 px {m.pck_2px:.3f}   5 px {m.pck_5px:.3f}   10 px {m.pck_10px:.3f}",
        f"miss rate      {m.miss_rate:.4f}   false detection rate {m.false_detection_rate:.4f}",
        f"rear error     median {m.rear_median_px:.2f} px",
        (
            f"OKS AP         {report.ap.ap:.3f}   AP50 {report.ap.ap50:.3f}   AP75 {report.ap.ap75:.3f}"
            "  (pycocotools; sigmas tip 0.0625 rear 0.125, area 34x34 px)"
        ),
    ]
    print("\n".join(lines), file=sys.stdout)
    return 0


def _run_station(args: argparse.Namespace) -> int:
    from stationcheck.commands.train_station import assess_station, station_split
    from stationcheck.config import load_config
    from stationcheck.evaluation.fitness import fitness_lines

    if args.model or args.coco or args.images or args.video or args.truth:
        raise InputFileError(
            "--station measures the station's own model on its own labels; "
            "leave out --model, --coco, --images, --video and --truth"
        )
    config = load_config(args.station)
    fitness = assess_station(config, station_split(config))
    if args.json:
        print(json.dumps(fitness.as_dict()))
    else:
        print("\n".join(fitness_lines(fitness)))
    return 0 if fitness.fit else 1
