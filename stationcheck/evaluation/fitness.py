"""The fitness report: is this model good enough for this station?

Measured on the station's held-out labelled frames (the last part of each recording, never
trained on; :mod:`stationcheck.labels.station_labels`): tip error median and p95 in pixels
and as a share of the smallest fastener zone's inner radius (the radius of the largest circle
inside its polygon: a tip error below it still puts the tip inside the zone when the tool sits on
the fastener's centre), the miss rate on frames with the tool in view and the false-detection
rate on frames marked "tool not visible".

The verdict "fit for this station" needs all three: p95 below the smallest inner radius,
misses <= :data:`MAX_MISS_RATE`, false detections <= :data:`MAX_FALSE_DETECTION_RATE`
(common practice, no source: an enable decided on a dwell of several frames tolerates rare
single-frame slips, not a tip placed outside the zone one frame in twenty), and enough held-out
frames of each kind for those rates to be shown (:data:`MIN_VISIBLE_FRAMES`,
:data:`MIN_ABSENT_FRAMES`).
"""

from __future__ import annotations

import datetime as dt
import json
import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import cv2
import numpy as np
import shapely

from stationcheck.config.model_proof import file_sha256
from stationcheck.config.schema import StationConfig
from stationcheck.core.records import Frame
from stationcheck.errors import InputFileError
from stationcheck.evaluation.accuracy_report import evaluate
from stationcheck.evaluation.truth import LabelledFrame
from stationcheck.labels.station_labels import StationLabel
from stationcheck.vision.detector import KeypointDetector

FORMAT_VERSION = 1
MAX_MISS_RATE = 0.02
MAX_FALSE_DETECTION_RATE = 0.01
# A rate can be shown to be within its limit only when one frame is no more than the limit:
# 1 / 0.02 = 50 frames with the tool in view, 1 / 0.01 = 100 frames without it.
MIN_VISIBLE_FRAMES = math.ceil(1.0 / MAX_MISS_RATE)
MIN_ABSENT_FRAMES = math.ceil(1.0 / MAX_FALSE_DETECTION_RATE)


@dataclass(frozen=True)
class SmallestZone:
    zone_id: str
    inner_radius_px: float


def smallest_fastener_zone(config: StationConfig) -> SmallestZone:
    """The fastener zone with the smallest inscribed circle (shapely's maximum inscribed
    circle; its ``length`` is the radius)."""
    best: SmallestZone | None = None
    for spec in config.zone_specs():
        if spec.kind != "fastener":
            continue
        radius = float(shapely.maximum_inscribed_circle(shapely.Polygon(spec.polygon_px)).length)
        if best is None or radius < best.inner_radius_px:
            best = SmallestZone(spec.id, radius)
    if best is None:
        raise InputFileError("the station has no fastener zone to measure the model against")
    return best


@dataclass(frozen=True)
class Fitness:
    """The fitness report (written as ``fitness.json``)."""

    model: str
    model_sha256: str
    refine_model: str
    refine_sha256: str
    held_out_frames: int
    tool_visible_frames: int
    tool_absent_frames: int
    held_out_spans: dict[str, tuple[float, float]]
    tip_median_px: float | None
    tip_p95_px: float | None
    smallest_zone: str
    inner_radius_px: float
    tip_median_share: float | None  # of the smallest inner radius
    tip_p95_share: float | None
    miss_rate: float | None
    false_detection_rate: float | None
    fit: bool
    reasons: tuple[str, ...]
    dry_run: dict[str, Any] = field(default_factory=dict)
    measured_at: str = ""
    format_version: int = FORMAT_VERSION

    @property
    def verdict(self) -> str:
        return "fit for this station" if self.fit else "NOT fit for this station"

    def as_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["verdict"] = self.verdict
        out["held_out_spans"] = {k: list(v) for k, v in self.held_out_spans.items()}
        out["reasons"] = list(self.reasons)
        return out


def verdict_reasons(
    p95_px: float | None,
    miss: float | None,
    false_rate: float | None,
    radius_px: float,
    visible_frames: int | None = None,
    absent_frames: int | None = None,
) -> tuple[str, ...]:
    """Why the model is not fit (empty: fit). With the frame counts given, too few held-out
    frames of either kind is a reason too: the rate could not show its limit."""
    reasons = []
    if visible_frames is not None and 0 < visible_frames < MIN_VISIBLE_FRAMES:
        reasons.append(
            f"only {visible_frames} held-out frames with the tool in view (at least "
            f"{MIN_VISIBLE_FRAMES} are needed to show misses <= {MAX_MISS_RATE:.0%}): label more"
        )
    if absent_frames is not None and 0 < absent_frames < MIN_ABSENT_FRAMES:
        reasons.append(
            f"only {absent_frames} held-out frames marked 'tool not visible' (at least "
            f"{MIN_ABSENT_FRAMES} are needed to show false detections <= "
            f"{MAX_FALSE_DETECTION_RATE:.0%}): record and label the tool out of view"
        )
    if p95_px is None:
        reasons.append("no held-out frame with the tool in view: tip error not measured")
    elif not p95_px < radius_px:
        reasons.append(
            f"tip p95 {p95_px:.2f} px is not below the smallest fastener zone's inner radius "
            f"{radius_px:.1f} px"
        )
    if miss is not None and miss > MAX_MISS_RATE:
        reasons.append(f"misses {miss:.1%} > {MAX_MISS_RATE:.0%}")
    if false_rate is None:
        reasons.append("no held-out frame marked 'tool not visible': false detections not measured")
    elif false_rate > MAX_FALSE_DETECTION_RATE:
        reasons.append(f"false detections {false_rate:.1%} > {MAX_FALSE_DETECTION_RATE:.0%}")
    return tuple(reasons)


def labelled_frames(labels: Sequence[StationLabel]) -> list[LabelledFrame]:
    out = []
    for item in labels:
        image = cv2.imread(str(item.image), cv2.IMREAD_COLOR)
        if image is None:
            raise InputFileError(f"cannot read labelled image {item.image}")
        frame = Frame(item.frame_index, item.t_s, np.asarray(image, np.uint8))
        out.append(LabelledFrame(frame, item.keypoints))
    return out


def measure_fitness(
    config: StationConfig,
    model_file: Path,
    detector: KeypointDetector,
    held_out: Sequence[StationLabel],
    spans: dict[str, tuple[float, float]],
    min_score: float,
) -> Fitness:
    """Figures and verdict on the held-out frames (the dry run is added by the caller)."""
    report = evaluate(detector, labelled_frames(held_out), min_score=min_score)
    m = report.metrics
    zone = smallest_fastener_zone(config)

    def value(x: float) -> float | None:
        return None if math.isnan(x) else x

    def share(x: float | None) -> float | None:
        return None if x is None else x / zone.inner_radius_px

    median, p95 = value(m.tip_median_px), value(m.tip_p95_px)
    miss, false_rate = value(m.miss_rate), value(m.false_detection_rate)
    reasons = verdict_reasons(
        p95, miss, false_rate, zone.inner_radius_px, m.visible_frames, m.absent_frames
    )
    refine_name = _refine_name(model_file)
    refine_file = model_file.parent / refine_name if refine_name else None
    return Fitness(
        model=str(model_file),
        model_sha256=file_sha256(model_file),
        refine_model=refine_name,
        refine_sha256=file_sha256(refine_file) if refine_file is not None else "",
        held_out_frames=m.frames,
        tool_visible_frames=m.visible_frames,
        tool_absent_frames=m.absent_frames,
        held_out_spans=spans,
        tip_median_px=median,
        tip_p95_px=p95,
        smallest_zone=zone.zone_id,
        inner_radius_px=zone.inner_radius_px,
        tip_median_share=share(median),
        tip_p95_share=share(p95),
        miss_rate=miss,
        false_detection_rate=false_rate,
        fit=not reasons,
        reasons=reasons,
        measured_at=dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
    )


def _refine_name(model_file: Path) -> str:
    from stationcheck.vision.onnx_model import KeypointModel

    return KeypointModel(model_file).info.refine_model or ""


def write_fitness(fitness: Fitness, path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(fitness.as_dict(), indent=2) + "\n", encoding="utf-8")
    tmp.replace(path)


def fitness_lines(fitness: Fitness) -> list[str]:
    """The report as text for people."""

    def px(v: float | None) -> str:
        return "-" if v is None else f"{v:.2f} px"

    def pct(v: float | None) -> str:
        return "-" if v is None else f"{v:.1%}"

    lines = [
        f"model          {fitness.model} (sha256 {fitness.model_sha256[:12]})",
        (
            f"held out       {fitness.held_out_frames} frames never trained on "
            f"({fitness.tool_visible_frames} with the tool in view, "
            f"{fitness.tool_absent_frames} without)"
        ),
        *(
            f"  span         {video or '(unnamed video)'}: {low:.1f}-{high:.1f} s"
            for video, (low, high) in fitness.held_out_spans.items()
        ),
        (
            f"tip error      median {px(fitness.tip_median_px)} ({pct(fitness.tip_median_share)}), "
            f"p95 {px(fitness.tip_p95_px)} ({pct(fitness.tip_p95_share)}) of the smallest "
            f"fastener zone's inner radius ({fitness.smallest_zone}: "
            f"{fitness.inner_radius_px:.1f} px)"
        ),
        (
            f"misses         {pct(fitness.miss_rate)} (limit {MAX_MISS_RATE:.0%})   "
            f"false detections {pct(fitness.false_detection_rate)} "
            f"(limit {MAX_FALSE_DETECTION_RATE:.0%})"
        ),
    ]
    dry = fitness.dry_run
    if dry.get("skipped"):
        lines.append(f"dry run        skipped: {dry['skipped']}")
    elif dry:
        lines.append(
            f"dry run        {dry.get('video')}: {dry.get('from_s', 0):.1f}-"
            f"{dry.get('to_s', 0):.1f} s, tool enabled in {dry.get('enabled_frames', 0)} of "
            f"{dry.get('frames', 0)} frames"
        )
        lines += [
            f"  {_seconds(item.get('t_s'))}  {item['text']}" for item in dry.get("timeline", [])
        ]
    lines.append(f"verdict        {fitness.verdict}")
    lines += [f"  - {reason}" for reason in fitness.reasons]
    return lines


def _seconds(t_s: object) -> str:
    return f"{t_s:8.2f} s" if isinstance(t_s, int | float) else "       - s"
