"""Fine-tuning a station's own model: its labelled frames, mixed with renderer frames, starting
from the station's current model (or the bundled one).

The mix is :data:`STATION_SHARE` of the station's own frames and the rest renderer frames
(random scenes and the demo station, as the bundled model was trained on), so the model learns
the station's tool without forgetting what a tool-free bench and other looks are. Every frame
gets the training augmentation (colour, blur, noise, affine, trailing motion blur, JPEG,
occlusion). The labels are split by time (:mod:`stationcheck.labels.station_labels`); only
the early part is trained on. The bundle is written to a fresh folder and moved into
``<station folder>/model/`` only when complete, so a failed or cancelled run leaves the
station's model as it was.
"""

from __future__ import annotations

import logging
import shutil
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from types import ModuleType

import cv2
import numpy as np

from stationcheck.errors import InputFileError
from stationcheck.labels.station_labels import StationLabel, TimeSplit
from stationcheck.training.augment import AugmentSettings
from stationcheck.training.bundle import write_bundle
from stationcheck.training.loop import Progress, TrainConfig, train
from stationcheck.training.samples import (
    ExampleSettings,
    FloatArray,
    FrameSource,
    FunctionSource,
    ImageU8,
    MovingSampleFn,
    SampleFn,
)
from stationcheck.training.sources import demo_moving_sample, demo_sample_functions

logger = logging.getLogger(__name__)

MODEL_DIR = "model"
MODEL_NAME = "tool_tip"
STATION_SHARE = 0.7  # the rest: renderer frames, so the model does not forget
# Of the renderer's frames, this share shows fast moves drawn over their exposure: a station's
# labels hold few fast frames (flow loses a blurred tool), and where a thin bit's smear fades out
# in front of it is learnt from many tools' moves.
FAST_SHARE = 1.0 / 3.0
# Defaults sized for ~1,000 labelled frames in <= 10 minutes on 2 CPU cores (one torch thread
# plus one data worker): the time budget usually ends the run.
DEFAULT_STEPS = 1500
DEFAULT_MINUTES = 8.5
FINE_TUNE_LEARNING_RATE = 1.5e-3
FINE_TUNE_WARMUP_STEPS = 30
# A station's fast moves are what its labels have fewest of (the flow loses a blurred tool), so
# its frames get trailing motion blur more often than the bundled model's training did.
FINE_TUNE_MOTION_BLUR_P = 0.5
CALIBRATION_FRAMES = 400
MOTION_FRAMES = 400


# A station's labels may hold many frames with the tool out of view (whole runs are marked at
# once); they are drawn at most this often, so most draws teach where the tool is. The renderer
# frames in the mix add more tool-free benches.
MAX_ABSENT_SHARE = 0.2
# Fast moves are where a fine-tuned model errs most and what labels have fewest of (flow loses a
# blurred tool), so a frame whose tip moved fast since the neighbouring labelled frame is drawn
# more often: weight 1 + speed / FAST_PX_PER_FRAME, at most MAX_FAST_WEIGHT.
FAST_PX_PER_FRAME = 10.0
MAX_FAST_WEIGHT = 4.0
# The empty view behind a video's frames (for smearing the tool alone in the motion-blur
# augmentation): the per-pixel median of this many of its tool-absent frames, evenly spread;
# a video with fewer has none and gets the window blur.
PLATE_FRAMES = 40
MIN_PLATE_FRAMES = 5


def background_plates(labels: Sequence[StationLabel]) -> dict[str, ImageU8]:
    """Per video, the per-pixel median of up to :data:`PLATE_FRAMES` of its tool-absent
    labelled frames (the station's fixed camera sees the same bench in all of them; a hand
    or part passing in a few is voted out)."""
    absent: dict[str, list[StationLabel]] = {}
    for label in labels:
        if not label.tool_visible:
            absent.setdefault(label.video, []).append(label)
    plates: dict[str, ImageU8] = {}
    for video, items in absent.items():
        if len(items) < MIN_PLATE_FRAMES:
            continue
        picked = sorted({round(i) for i in np.linspace(0, len(items) - 1, PLATE_FRAMES)})
        read = [cv2.imread(str(items[i].image), cv2.IMREAD_COLOR) for i in picked]
        images = [np.asarray(image, np.uint8) for image in read if image is not None]
        if len(images) != len(read) or len({image.shape for image in images}) != 1:
            logger.warning("%s: tool-absent frames unreadable or of mixed sizes; no plate", video)
            continue
        plates[video] = np.median(np.stack(images), axis=0).astype(np.uint8)
    return plates


def tip_speeds(labels: Sequence[StationLabel]) -> list[float]:
    """Each label's tip speed in px per frame, from the nearest labelled frame of the same video
    within 2 frames before or after it with the tip in view (0 when there is none)."""
    tips = {
        (label.video, label.frame_index): label.keypoints[0, :2]
        for label in labels
        if label.tool_visible
    }
    speeds = []
    for label in labels:
        speed = 0.0
        if label.tool_visible:
            for step in (1, -1, 2, -2):
                other = tips.get((label.video, label.frame_index + step))
                if other is not None:
                    speed = float(np.hypot(*(label.keypoints[0, :2] - other))) / abs(step)
                    break
        speeds.append(speed)
    return speeds


class LabelSource:
    """Frames of the station's labels, read from their PNG files when drawn: tool-absent ones
    at their share of the labels, but at most ``max_absent_share`` of the draws; with
    ``plates``, each frame with its video's empty view (:func:`background_plates`)."""

    def __init__(
        self,
        labels: Sequence[StationLabel],
        max_absent_share: float = MAX_ABSENT_SHARE,
        plates: bool = True,
    ) -> None:
        if not labels:
            raise InputFileError("no labelled frames to draw from")
        self._labels = tuple(labels)
        self._seen = tuple(label for label in labels if label.tool_visible)
        self._absent = tuple(label for label in labels if not label.tool_visible)
        share = len(self._absent) / len(self._labels)
        self.absent_share = share if not self._seen else min(share, max_absent_share)
        weights = np.array(
            [min(MAX_FAST_WEIGHT, 1.0 + v / FAST_PX_PER_FRAME) for v in tip_speeds(self._seen)]
        )
        self._seen_p = weights / weights.sum() if len(weights) else weights
        self.plates = background_plates(self._labels) if self._seen and plates else {}

    def __len__(self) -> int:
        return len(self._labels)

    def sample(self, rng: np.random.Generator) -> tuple[ImageU8, FloatArray]:
        image, kps, _ = self.sample_with_background(rng)
        return image, kps

    def sample_with_background(
        self, rng: np.random.Generator
    ) -> tuple[ImageU8, FloatArray, ImageU8 | None]:
        """A labelled frame and its video's empty view (None if it has none)."""
        if rng.random() < self.absent_share:
            item = self._absent[int(rng.integers(len(self._absent)))]
        else:
            item = self._seen[int(rng.choice(len(self._seen), p=self._seen_p))]
        image = cv2.imread(str(item.image), cv2.IMREAD_COLOR)
        if image is None:
            raise InputFileError(f"cannot read labelled image {item.image}")
        return np.asarray(image, np.uint8), item.keypoints.copy(), self.plates.get(item.video)


def mixed_source(
    labels: Sequence[StationLabel],
    station_share: float = STATION_SHARE,
    renderer: ModuleType | None = None,
    fast_share: float = 0.0,
    plates: bool = True,
) -> FrameSource:
    """The station's frames at ``station_share``, the renderer's training frames (``renderer``:
    its training module, passed in by the command) for the rest, ``fast_share`` of those the
    renderer's frames of fast moves (the tool drawn over its exposure, as a camera smears it).
    ``plates``: work out each video's empty view, for the motion-blur augmentation (a source
    whose frames are drawn without it, as calibration's, needs none)."""
    own = LabelSource(labels, plates=plates)
    functions: list[tuple[SampleFn, float]] = []
    if station_share < 1.0 and renderer is not None:
        rest = 1.0 - station_share
        moving = demo_moving_sample(renderer)
        if moving is not None and fast_share > 0.0:
            functions.append((_without_step(moving), rest * fast_share))
            rest -= rest * fast_share
        rendered = demo_sample_functions(renderer)
        total = sum(w for _, w in rendered)
        functions += [(f, rest * w / total) for f, w in rendered]
    return FunctionSource(functions, [(own.sample_with_background, station_share)])


def _without_step(moving: MovingSampleFn) -> SampleFn:
    def sample(rng: np.random.Generator) -> tuple[ImageU8, FloatArray]:
        image, kps, _ = moving(rng)
        return image, np.asarray(kps, np.float64)

    return sample


@dataclass(frozen=True)
class FineTuneSettings:
    start_from: Path  # coarse model file (its refine partner beside it)
    out_dir: Path  # <station folder>/model
    max_steps: int = DEFAULT_STEPS
    max_minutes: float | None = DEFAULT_MINUTES
    seed: int = 0
    batch_size: int = 32
    workers: int = 1
    threads: int = 1  # torch threads beside the data worker
    station_share: float = STATION_SHARE
    fast_share: float = FAST_SHARE
    calibration_frames: int = CALIBRATION_FRAMES
    motion_frames: int = MOTION_FRAMES
    # the demo renderer's training module (frames mixed in, fast moves for the motion lead);
    # passed in by the command, as the demo sits above training in the layers
    renderer: ModuleType | None = None


PhaseFn = Callable[[str, int, int], None]  # phase, step, max_steps


def fine_tune(
    split: TimeSplit,
    settings: FineTuneSettings,
    on_progress: Callable[[Progress], None] | None = None,
    on_phase: PhaseFn | None = None,
) -> Path:
    """Trains, calibrates, measures the motion lead, and returns the station's coarse model
    path (in ``settings.out_dir``)."""
    config = TrainConfig(
        seed=settings.seed,
        max_steps=settings.max_steps,
        max_minutes=settings.max_minutes,
        batch_size=settings.batch_size,
        learning_rate=FINE_TUNE_LEARNING_RATE,
        warmup_steps=min(FINE_TUNE_WARMUP_STEPS, max(1, settings.max_steps // 4)),
        checkpoint_every=10**9,
        log_every=10,
        threads=settings.threads,
        workers=settings.workers,
        model_name=MODEL_NAME,
        start_from=settings.start_from,
    )
    source = mixed_source(
        split.train, settings.station_share, settings.renderer, settings.fast_share
    )
    if on_phase is not None:
        on_phase("training", 0, config.max_steps)
    examples = ExampleSettings(augment=AugmentSettings(p_motion_blur=FINE_TUNE_MOTION_BLUR_P))
    result = train(source, config, on_progress=on_progress, example_settings=examples)
    calibration_labels = split.calibration or split.train
    calibration = mixed_source(
        calibration_labels, max(settings.station_share, 0.5), settings.renderer, plates=False
    )
    staging = settings.out_dir.with_name(settings.out_dir.name + ".new")
    if staging.exists():
        shutil.rmtree(staging)
    if on_phase is not None:
        on_phase("calibrating", result.steps, config.max_steps)
    try:
        write_bundle(
            result,
            replace(config, start_from=None),
            staging,
            calibration,
            settings.calibration_frames,
            moving_sample=(
                demo_moving_sample(settings.renderer)
                if settings.motion_frames > 0 and settings.renderer is not None
                else None
            ),
            motion_frames=settings.motion_frames,
        )
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)  # the station's model stays as it was
        raise
    return install_bundle(staging, settings.out_dir)


def install_bundle(staging: Path, out_dir: Path) -> Path:
    """Moves the two model files from ``staging`` into ``out_dir`` (replacing the old ones,
    other files there are kept) and returns the coarse model's path."""
    out_dir.mkdir(parents=True, exist_ok=True)
    coarse = out_dir / f"{MODEL_NAME}.coarse.onnx"
    for name in (f"{MODEL_NAME}.refine.onnx", f"{MODEL_NAME}.coarse.onnx"):
        (staging / name).replace(out_dir / name)
    shutil.rmtree(staging, ignore_errors=True)
    logger.info("station model written: %s", coarse)
    return coarse
