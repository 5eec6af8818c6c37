"""Teaching the model a tool it never saw, end to end, with figures (demo data).

Renders a station recording with the held-out tool and glove (``held_out_looks.py``), measures
the bundled model on it, labels it as an engineer would on the Label tab (at most 60 simulated
clicks on the proposed and queued frames, the product's propagation between them, saved as the
station's COCO dataset), runs ``stationcheck train --station`` (time-limited), and prints the
fitness report, the held-out figures against the renderer's truth, and a replay of another
scene with that look (false enables, decision mismatches). Run: ``.venv/bin/python tools/own_tool_demo.py``
(about 15-20 minutes on 2 cores; ``--minutes`` sets the training budget).
"""

from __future__ import annotations

import argparse
import json
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

from stationcheck.config.model_proof import file_sha256
from stationcheck.demo_station import sample_video as sv
from stationcheck.demo_station.files import DEMO_CONFIG, DEMO_SCRIPT, REPO_ROOT
from stationcheck.demo_station.own_tool import (
    RECORDING_SCRIPT,
    save_labels,
    simulate_labelling,
    unseen_rig,
)
from stationcheck.evaluation.accuracy_report import evaluate
from stationcheck.evaluation.truth import read_video_frames
from stationcheck.vision.detector import bundled_model_path, load_detector

VIDEO = "demo_station.mp4"


def render(script: Path, out_dir: Path, seed: int | None) -> sv.Production:
    out_dir.mkdir(parents=True, exist_ok=True)
    production = sv.produce(script, DEMO_CONFIG, seed=seed, rig=unseen_rig())
    sv.write_video(sv.FrameRenderer(production), out_dir / VIDEO)
    sv.write_sidecars(production, out_dir, DEMO_CONFIG)
    return production


def make_station(station: Path) -> Path:
    from stationcheck.web.setup import yaml_document

    if station.exists():
        shutil.rmtree(station)
    station.mkdir(parents=True)
    shutil.copytree(DEMO_CONFIG.parent / "demo_station", station / "demo_station")
    document = yaml_document.load_file(DEMO_CONFIG)
    plain = yaml_document.to_plain(document)
    plain["camera"]["source"] = f"recordings/recording/{VIDEO}"
    plain["model"]["path"] = "bundled"
    plain["station"]["reference_frame"] = "demo_station/reference.png"
    yaml_document.merge_into(document, plain)
    config = station / "station.yaml"
    config.write_text(yaml_document.dump_text(document), encoding="utf-8")
    return config


def point_at_bundled(config: Path) -> None:
    from stationcheck.web.setup import yaml_document

    document = yaml_document.load_file(config)
    plain = yaml_document.to_plain(document)
    plain["model"]["path"] = "bundled"
    yaml_document.merge_into(document, plain)
    config.write_text(yaml_document.dump_text(document), encoding="utf-8")


def figures(model: Path | None, video: Path, first_s: float = 0.0) -> dict[str, float | None]:
    detector = load_detector(model, threads=1)
    frames = (
        f
        for f in read_video_frames(video, video.with_name("demo_station_truth.csv"))
        if f.frame.t_s >= first_s
    )
    return {
        k: v
        for k, v in evaluate(detector, frames).as_dict().items()
        if k in ("frames", "tip_median_px", "tip_p95_px", "miss_rate", "false_detection_rate")
    }


def detector_ms(model: Path, video: Path, count: int = 300) -> float:
    detector = load_detector(model, threads=1)
    times = []
    hint = None
    for item in read_video_frames(video, video.with_name("demo_station_truth.csv")):
        started = time.perf_counter()
        tip = detector.detect(item.frame, hint).get("tip")
        times.append(1000 * (time.perf_counter() - started))
        hint = (tip.x_px, tip.y_px) if tip is not None and tip.score >= 0.5 else None
        if len(times) >= count:
            break
    return statistics.median(times)


def replay(config: Path, scene: Path, log: Path, model: Path | None) -> dict[str, object]:
    from stationcheck.pipeline.session import ReplaySettings, run_replay

    log.unlink(missing_ok=True)
    report = run_replay(
        ReplaySettings(
            config_path=config,
            log_path=log,
            video=scene / VIDEO,
            inputs=scene / "demo_station_inputs.jsonl",
            expected=scene / "demo_station_expected.jsonl",
            model_path=model,
        )
    )
    out = report.to_json()
    keys = ("frames", "false_enables", "mismatches", "mismatches_by_kind", "mismatch_details")
    return {k: out.get(k) for k in keys}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("/tmp/stationcheck-own-tool"))
    parser.add_argument(
        "--minutes", type=float, default=None, help="training budget (default: train's own)"
    )
    parser.add_argument(
        "--steps", type=int, default=None, help="training steps (default: train's own)"
    )
    parser.add_argument("--seed", type=int, default=0, help="the fine-tune's random seed")
    parser.add_argument("--clicks", type=int, default=60)
    parser.add_argument(
        "--every",
        type=int,
        default=1,
        help="save every n-th propagated frame (1: all, as the Label tab)",
    )
    parser.add_argument("--skip-render", action="store_true", help="reuse rendered scenes")
    args = parser.parse_args()
    out: Path = args.out
    station = out / "station"
    recording = station / "recordings" / "recording"
    replay_scene = out / "replay_scene"
    shown: dict[str, object] = {}
    started = time.perf_counter()
    if not args.skip_render:
        config = make_station(station)
        recording_p = render(RECORDING_SCRIPT, recording, None)
        render(DEMO_SCRIPT, replay_scene, 8)
    else:
        config = station / "station.yaml"
        recording_p = sv.produce(RECORDING_SCRIPT, DEMO_CONFIG, rig=unseen_rig())
        shutil.rmtree(station / "labels", ignore_errors=True)
        shutil.rmtree(station / "model", ignore_errors=True)
        point_at_bundled(config)
    print(f"rendered in {time.perf_counter() - started:.0f} s", flush=True)
    shown["bundled_on_recording"] = figures(None, recording / VIDEO)
    print("bundled model on the recording:", shown["bundled_on_recording"], flush=True)
    t0 = time.perf_counter()
    labels, clicks, marks = simulate_labelling(
        recording / VIDEO, recording_p.rows, args.clicks, seed=3
    )
    truth = {r.frame_index: r for r in recording_p.rows}
    errors = [
        float(
            np.hypot(
                lab.tip[0] - truth[lab.frame_index].tip_x_px,
                lab.tip[1] - truth[lab.frame_index].tip_y_px,
            )
        )
        for lab in labels
        if lab.source == "propagated" and lab.tip is not None and truth[lab.frame_index].tip_v
    ]
    wrong_absent = sum(1 for lab in labels if lab.tip is None and truth[lab.frame_index].tip_v)
    wrong_present = sum(
        1 for lab in labels if lab.tip is not None and not truth[lab.frame_index].tip_v
    )
    saved = save_labels(station, recording / VIDEO, labels, args.every)
    shown["labelling"] = {
        "clicks": clicks,
        "out_of_view_marks": marks,
        "frames_marked_out_of_view": sum(
            1 for lab in labels if lab.tip is None and lab.source == "propagated"
        ),
        "frames_labelled": len(labels),
        "frames_not_visible": sum(1 for lab in labels if lab.tip is None),
        "frames_saved": saved.images,
        "frames": len(recording_p.rows),
        "propagated_tip_error_median_px": statistics.median(errors) if errors else None,
        "propagated_tip_error_p95_px": float(np.percentile(errors, 95)) if errors else None,
        "propagated_tip_error_gt_5px": sum(e > 5 for e in errors),
        "marked_not_visible_but_visible": wrong_absent,
        "labelled_visible_but_not": wrong_present,
        "seconds": round(time.perf_counter() - t0, 1),
    }
    print("labelling:", shown["labelling"], flush=True)
    t0 = time.perf_counter()
    command = [
        str(Path(sys.executable).with_name("stationcheck")),
        "train",
        "--station",
        str(config),
        "--progress-json",
        *(["--minutes", str(args.minutes)] if args.minutes is not None else []),
        *(["--steps", str(args.steps)] if args.steps is not None else []),
        "--seed",
        str(args.seed),
    ]
    result = subprocess.run(command, capture_output=True, text=True, check=False)
    lines = [json.loads(line) for line in result.stdout.splitlines() if line.startswith("{")]
    train_s = time.perf_counter() - t0
    if result.returncode != 0 or not lines or "done" not in lines[-1]:
        print(result.stdout[-2000:], result.stderr[-2000:])
        return 1
    last = lines[-1]
    fitness = last["fitness"]
    model = Path(last["model"])
    shown["train"] = {
        "seconds": round(train_s, 1),
        "progress_lines": len(lines),
        "steps": max(
            (ln.get("step", 0) for ln in lines if ln.get("phase") == "training"), default=0
        ),
    }
    shown["fitness"] = {
        k: fitness[k]
        for k in (
            "verdict",
            "held_out_frames",
            "tool_absent_frames",
            "tip_median_px",
            "tip_p95_px",
            "inner_radius_px",
            "miss_rate",
            "false_detection_rate",
            "reasons",
        )
    }
    shown["fitness"]["dry_run_enabled_frames"] = fitness["dry_run"].get("enabled_frames")  # type: ignore[index]
    held_from = min(low for low, _ in fitness["held_out_spans"].values())
    shown["fine_tuned_held_out_vs_truth"] = figures(model, recording / VIDEO, held_from)
    shown["bundled_held_out_vs_truth"] = figures(None, recording / VIDEO, held_from)
    shown["fine_tuned_on_replay_scene"] = figures(model, replay_scene / VIDEO)
    shown["replay_fine_tuned"] = replay(config, replay_scene, out / "replay_fine.sqlite", model)
    shown["replay_bundled"] = replay(
        config, replay_scene, out / "replay_bundled.sqlite", bundled_model_path()
    )
    shown["fine_tuned_on_sample_video"] = figures(model, REPO_ROOT / "sample_video" / VIDEO)
    shown["detector_ms_median_1_thread"] = round(detector_ms(model, replay_scene / VIDEO), 2)
    shown["model_sha256"] = file_sha256(model)
    shown["total_seconds"] = round(time.perf_counter() - started, 1)
    print(json.dumps(shown, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
