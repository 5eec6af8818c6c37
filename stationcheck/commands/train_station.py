"""``train --station`` and ``eval --station``: a station's own model, fine-tuned on its labels
and proven on its held-out frames before it goes live.

``--progress-json`` prints one JSON object per line on stdout for a screen to follow:
``{"phase", "step", "max_steps", "elapsed_s", "left_s"}`` while working, then
``{"done": true, "model": PATH, "fitness": {...}}`` or ``{"error": "<one line>"}``.
"""

from __future__ import annotations

import json
import signal
import sys
import time
from dataclasses import replace
from pathlib import Path
from types import ModuleType
from typing import Any

from stationcheck.config import StationConfig, load_config
from stationcheck.config.model_proof import fitness_path, station_model_file
from stationcheck.errors import InputFileError, StationcheckError
from stationcheck.evaluation.fitness import Fitness, measure_fitness, write_fitness
from stationcheck.labels.station_labels import TimeSplit, read_station_labels, split_by_time

MAX_TIMELINE_ENTRIES = 200
# Work after training (calibration, motion lead, fitness, dry run), for the time-left estimate.
AFTER_TRAINING_S = 60.0


class ProgressPrinter:
    """Prints progress lines (JSON with ``--progress-json``, else words on stderr)."""

    def __init__(self, as_json: bool, budget_s: float | None) -> None:
        self.as_json = as_json
        self.budget_s = budget_s
        self.started = time.monotonic()

    def phase(self, phase: str, step: int, max_steps: int, left_s: float | None = None) -> None:
        elapsed = time.monotonic() - self.started
        if left_s is None:
            left_s = AFTER_TRAINING_S if phase != "training" else self._left(step, max_steps)
        if self.as_json:
            line = {
                "phase": phase,
                "step": step,
                "max_steps": max_steps,
                "elapsed_s": round(elapsed, 1),
                "left_s": round(max(left_s, 0.0), 1),
            }
            print(json.dumps(line), flush=True)
        else:
            print(
                f"{phase}: step {step}/{max_steps}, {elapsed / 60:.1f} min, "
                f"~{left_s / 60:.1f} min left",
                file=sys.stderr,
                flush=True,
            )

    def _left(self, step: int, max_steps: int) -> float:
        elapsed = time.monotonic() - self.started
        by_steps = elapsed / max(step, 1) * (max_steps - step) if step else float("inf")
        by_time = (self.budget_s - elapsed) if self.budget_s is not None else float("inf")
        left = min(by_steps, by_time)
        return (left if left != float("inf") else 0.0) + AFTER_TRAINING_S

    def done(self, model: Path, fitness: Fitness) -> None:
        if self.as_json:
            print(json.dumps({"done": True, "model": str(model), "fitness": fitness.as_dict()}))

    def error(self, exc: BaseException) -> None:
        if self.as_json:
            text = str(exc).strip().splitlines()
            print(json.dumps({"error": text[0] if text else type(exc).__name__}), flush=True)


def station_split(config: StationConfig) -> TimeSplit:
    return split_by_time(read_station_labels(config.resolve(".")))


def assess_station(config: StationConfig, split: TimeSplit) -> Fitness:
    """Measures the station's model on its held-out frames, dry-runs the held-out span and
    writes ``<station folder>/model/fitness.json``."""
    from stationcheck.vision.detector import load_detector

    model_file = station_model_file(config)
    detector = load_detector(model_file, threads=config.model.threads)
    spans = split.held_out_spans()
    fitness = measure_fitness(
        config, model_file, detector, split.held_out, spans, config.model.min_score
    )
    fitness = replace(fitness, dry_run=held_out_dry_run(config, spans))
    write_fitness(fitness, fitness_path(config.resolve(".")))
    return fitness


def held_out_dry_run(
    config: StationConfig, spans: dict[str, tuple[float, float]]
) -> dict[str, Any]:
    """The setup screen's dry run over the first held-out span whose video is at hand: the
    real frame path with this model, its decision timeline (nothing drawn, nothing stored)."""
    from stationcheck.web.setup.dry_run import DryRunRequest, inputs_beside, run_dry

    for video_name, (low, high) in spans.items():
        video = config.resolve(video_name) if video_name else None
        if video is None or not video.is_file():
            continue
        inputs = inputs_beside(video)
        request = DryRunRequest(video, inputs, low, max(high - low, 0.1), every=10**9)
        try:
            recorder = run_dry(config, request)
        except StationcheckError as exc:
            return {"skipped": f"{video}: {exc}"}
        # the run starts at the open unit's start (lead-in); the report shows the span itself
        timeline = [e for e in recorder.timeline if e["t_s"] is None or e["t_s"] >= low - 1e-6]
        return {
            "video": video_name,
            "inputs": str(inputs) if inputs is not None else None,
            "from_s": low,
            "to_s": high,
            "frames": recorder.run_frames,
            "enabled_frames": recorder.enabled_frames,
            "timeline": timeline[:MAX_TIMELINE_ENTRIES],
            "timeline_cut": max(0, len(timeline) - MAX_TIMELINE_ENTRIES),
        }
    names = ", ".join(sorted(spans)) or "(none)"
    return {"skipped": f"no held-out recording found in the station folder ({names})"}


def point_config_at(config_path: Path, model_file: Path) -> None:
    """Sets ``model.path`` in the YAML file to ``model_file`` (relative to the file), keeping
    its comments and layout."""
    from stationcheck.web.setup import yaml_document

    document = yaml_document.load_file(config_path)
    relative = model_file.resolve().relative_to(config_path.resolve().parent).as_posix()
    plain = yaml_document.to_plain(document)
    plain.setdefault("model", {})["path"] = relative
    yaml_document.merge_into(document, plain)
    tmp = config_path.with_name(config_path.name + ".tmp")
    tmp.write_text(yaml_document.dump_text(document), encoding="utf-8")
    tmp.replace(config_path)


def train_station(args: Any) -> int:
    import stationcheck.training  # noqa: F401  (raises the install hint without torch)
    from stationcheck.commands.train import start_from_path
    from stationcheck.training.loop import Progress
    from stationcheck.training.station import (
        DEFAULT_MINUTES,
        DEFAULT_STEPS,
        MODEL_DIR,
        STATION_SHARE,
        FineTuneSettings,
        fine_tune,
    )

    def _share(value: float | None) -> float:
        share = 1.0 - STATION_SHARE if value is None else value
        if not 0.0 <= share < 1.0:
            raise InputFileError(f"--rendered-share must be in [0, 1), got {value}")
        return share

    minutes = args.minutes if args.minutes is not None else DEFAULT_MINUTES
    printer = ProgressPrinter(args.progress_json, 60.0 * minutes)
    previous = _stop_on_terminate()
    try:
        printer.phase("reading labels", 0, 0)
        config_path: Path = args.station
        config = load_config(config_path)
        split = station_split(config)
        start = start_from_path(args.start_from) or station_model_file(config)
        settings = FineTuneSettings(
            start_from=start,
            out_dir=config.resolve(MODEL_DIR),
            max_steps=args.steps if args.steps is not None else DEFAULT_STEPS,
            max_minutes=minutes,
            seed=args.seed,
            batch_size=args.batch_size,
            workers=args.workers,
            threads=args.threads,
            calibration_frames=args.calibration_frames,
            motion_frames=args.motion_frames,
            station_share=1.0 - _share(args.rendered_share),
            renderer=_renderer(),
        )

        def on_progress(p: Progress) -> None:
            printer.phase("training", p.step, p.max_steps)

        model = fine_tune(split, settings, on_progress, on_phase=printer.phase)
        point_config_at(config_path, model)
        printer.phase("fitness", settings.max_steps, settings.max_steps, left_s=20.0)
        fitness = assess_station(load_config(config_path), split)
    except (Exception, KeyboardInterrupt) as exc:
        printer.error(exc if isinstance(exc, Exception) else Exception("cancelled"))
        raise
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
    printer.done(model, fitness)
    if not args.progress_json:
        from stationcheck.evaluation.fitness import fitness_lines

        print(f"wrote {model} and pointed {config_path} at it")
        print("\n".join(fitness_lines(fitness)))
    return 0


def _stop_on_terminate() -> signal.Handlers | Any:
    """A screen's cancel ends the process with SIGTERM: stop like Ctrl-C, so the last line
    says so and the station's model is left as it was."""

    def stop(signum: int, frame: object) -> None:
        raise KeyboardInterrupt

    try:
        return signal.signal(signal.SIGTERM, stop)
    except ValueError:  # not the main thread (called from a server thread)
        return None


def _renderer() -> ModuleType:
    from stationcheck.demo_station import training as demo_training

    return demo_training
