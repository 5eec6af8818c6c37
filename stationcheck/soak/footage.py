"""What a soak replays: a recording's ground truth, station inputs and detector answers.

The detector's answers are recorded once per frame of the video (``model``: the station's ONNX
detector on every frame, cached; ``truth``: the true keypoints), so a soak of a million frames
runs the tracker, zones, frozen-picture check, image judgements and sequencer without decoding
or inferring again. The answers on faulted frames are derived from these (see ``runner``).
"""

from __future__ import annotations

import hashlib
import json
import logging
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from stationcheck.config import load_config
from stationcheck.core.observations import Observation
from stationcheck.core.plan import StationPlan
from stationcheck.pipeline.station_inputs import read_station_inputs
from stationcheck.pipeline.truth_sidecar import TruthTable, load_truth, truth_points
from stationcheck.vision.table_detector import PointTable

logger = logging.getLogger(__name__)

KeypointChoice = Literal["truth", "model"]
CACHE = Path.home() / ".cache" / "stationcheck"


@dataclass(frozen=True)
class Footage:
    plan: StationPlan
    truth: TruthTable
    inputs: tuple[Observation, ...]  # t_s from the recording's start
    answers: PointTable  # detector answers by frame index
    fps: float
    frame_count: int
    keypoints: KeypointChoice
    stale_frame_ms: float
    link_timeout_s: float
    picture_size: tuple[int, int]  # (width, height) of the video the keypoints are in


def load_footage(
    config_path: Path, video: Path, inputs: Path, truth: Path, keypoints: KeypointChoice = "truth"
) -> Footage:
    from stationcheck.live.session import link_limits

    config = load_config(config_path)
    plan = config.to_plan()
    table = load_truth(truth)
    answers = truth_points(table) if keypoints == "truth" else _model_answers(video, config)
    frame_count = min(len(table.rows), len(answers))
    return Footage(
        plan=plan,
        truth=table,
        inputs=read_station_inputs(inputs),
        answers=answers,
        fps=float(config.camera.fps),
        frame_count=frame_count,
        keypoints=keypoints,
        stale_frame_ms=plan.thresholds.stale_frame_ms,
        link_timeout_s=link_limits(config).link_timeout_s,
        picture_size=_picture_size(video),
    )


def _picture_size(video: Path) -> tuple[int, int]:
    from stationcheck.sources.video_file import VideoFileSource

    source = VideoFileSource(video)  # names what is wrong with a missing or damaged file
    try:
        return source.width_px, source.height_px
    finally:
        source.close()


def _model_answers(video: Path, config: object) -> PointTable:
    """The station's detector on every frame (the previous tip as its hint, as ``eval`` does),
    cached by video and model content."""
    from stationcheck.sources.video_file import VideoFileSource
    from stationcheck.vision.detector import bundled_model_path, load_detector

    model_path = getattr(config, "model_path", None) or bundled_model_path()
    digest = hashlib.sha256(video.read_bytes() + Path(model_path).read_bytes()).hexdigest()[:16]
    cache = CACHE / f"soak-answers-{digest}.json"
    if cache.is_file():
        raw = json.loads(cache.read_text(encoding="utf-8"))
        return {int(k): {n: tuple(p) for n, p in v.items()} for k, v in raw.items()}
    logger.info("recording the detector's answers on %s once (cached in %s)", video, cache)
    detector = load_detector(getattr(config, "model_path", None))
    answers: dict[int, dict[str, tuple[float, float, float]]] = {}
    hint: tuple[float, float] | None = None
    for frame in VideoFileSource(video):
        found = detector.detect(frame, hint)
        answers[frame.index] = {k.name: (k.x_px, k.y_px, k.score) for k in found.points}
        tip = found.get("tip")
        hint = (tip.x_px, tip.y_px) if tip is not None and tip.score >= 0.5 else None
    cache.parent.mkdir(parents=True, exist_ok=True)
    cache.write_text(json.dumps(answers), encoding="utf-8")
    return answers
