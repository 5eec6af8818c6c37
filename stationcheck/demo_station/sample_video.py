"""The sample video of the demo station and its sidecar files (demo data).

``produce`` plans everything from the scene script and the station config (no pixels yet);
``render_frame`` draws one frame of the plan; ``write_sample`` writes the video, the sidecars,
the reference frame and the contact sheet.
"""

from __future__ import annotations

import json
import logging
import math
import time
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import cv2
import numpy as np

from stationcheck.config import load_config
from stationcheck.core.plan import FastenStep, StationPlan
from stationcheck.demo_station import compositor as comp
from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import Camera, CameraTransform, Exposure
from stationcheck.demo_station.choreography import Choreography, choreograph
from stationcheck.demo_station.decisions import expected_decisions
from stationcheck.demo_station.files import (
    DEMO_CONFIG,
    DEMO_SCRIPT,
    EXPECTED_NAME,
    INPUTS_NAME,
    META_NAME,
    REPO_ROOT,
    TRUTH_NAME,
    VIDEO_NAME,
)
from stationcheck.demo_station.ground_truth import ground_truth
from stationcheck.demo_station.look import LookFilter
from stationcheck.demo_station.rig import OperatorRig, RigLayers, SoftShadow
from stationcheck.demo_station.script import Limits, SceneScript, load_script
from stationcheck.demo_station.shading import as_u8
from stationcheck.demo_station.station_scene import REFERENCE_STATE, StationScene
from stationcheck.errors import InputFileError
from stationcheck.pipeline.truth_rows import TruthRow, write_truth_csv

logger = logging.getLogger(__name__)

DEFAULT_SCRIPT = DEMO_SCRIPT
DEFAULT_CONFIG = DEMO_CONFIG
NOISE_SIGMA = 1.8
LENS_BLUR_PX = 0.7  # a 640x480 camera's softness; also keeps the mp4v file small
SHADOW = 0.38


@dataclass
class Production:
    """Everything about the sample video except its pixels."""

    script: SceneScript
    plan: StationPlan
    choreography: Choreography
    rows: list[TruthRow]
    decisions: list[dict[str, Any]]
    rig: OperatorRig


def script_limits(plan: StationPlan) -> Limits:
    fasten = next(s for s in plan.steps if isinstance(s, FastenStep))
    torque = fasten.torque_nm
    angle = fasten.angle_deg
    return Limits(
        (torque.low, torque.high) if torque else (-math.inf, math.inf),
        (angle.low, angle.high) if angle else (-math.inf, math.inf),
        tuple(z.id for z in plan.zones if z.kind == "fastener"),
    )


def produce(
    script_path: Path = DEFAULT_SCRIPT,
    config_path: Path = DEFAULT_CONFIG,
    seed: int | None = None,
    rig: OperatorRig | None = None,
) -> Production:
    plan = load_config(config_path).to_plan()
    script = load_script(script_path, script_limits(plan))
    if seed is not None:
        script = replace(script, seed=seed)
    return plan_production(script, plan, rig)


def plan_production(
    script: SceneScript, plan: StationPlan, rig: OperatorRig | None = None
) -> Production:
    """Everything but the pixels of a loaded script on a station plan."""
    knobs = script.knobs
    rig = rig or OperatorRig(knobs.tool, knobs.arm)
    chor = choreograph(script, rig, knobs.fps)
    rows = ground_truth(chor, rig, plan.zones, knobs.view)
    decisions = expected_decisions(
        plan, rows, chor.inputs, chor.fps, (knobs.view.width_px, knobs.view.height_px)
    )
    return Production(script, plan, chor, rows, decisions, rig)


class FrameRenderer:
    """Draws frames of a production; keeps the still scene and camera between frames."""

    def __init__(self, production: Production) -> None:
        self.p = production
        self.scene = StationScene(bench=production.script.knobs.bench)
        self.view = production.script.knobs.view
        self.camera = Camera(
            layout.FRAME_WIDTH_PX,
            layout.FRAME_HEIGHT_PX,
            production.script.seed + 5,
            NOISE_SIGMA,
            lens_blur_px=LENS_BLUR_PX,
        )
        look = production.script.look
        self._look = (
            None
            if look.is_plain
            else LookFilter(
                look, self.view.width_px, self.view.height_px, production.script.seed + 11
            )
        )
        self._part_shadows = {
            k: SoftShadow.of(self.scene.part(k)[0], 4.0) for k in ("gasket", "cover")
        }

    def scene_image(self, frame: int) -> np.ndarray:
        """The composed scene in reference-frame coordinates, before the camera."""
        return self.scene_with_layers(frame)[0]

    def scene_with_layers(self, frame: int) -> tuple[np.ndarray, RigLayers]:
        """The composed scene and what the tool and fist covered in it."""
        chor = self.p.choreography
        state, fade_from, alpha = chor.state(frame)
        still = self.scene.image(state)
        if fade_from is not None:
            image = as_u8(
                cv2.addWeighted(self.scene.image(fade_from), 1.0 - alpha, still, alpha, 0.0)
            )
        else:
            image = still.copy()
        pose = chor.pose(frame)
        part = chor.carried(frame)
        if part is not None:
            sprite, centre = self.scene.part(part)
            at = self.p.rig.reach_point(pose)
            scale = 1.0 + 0.0015 * pose.lift_px
            m = comp.pose_affine(centre, at, 0.0, scale, scale)
            soft = self._part_shadows[part]
            shadow = m.copy()
            shadow[:, 2] += (0.2 * pose.lift_px + 2.0, 0.3 * pose.lift_px + 3.0)
            comp.darken(image, soft.alpha, [soft.affine(shadow)], 0.35)
            comp.blend(image, sprite, [m])
        previous = chor.pose(frame - 1) if frame > 0 else None
        layers = self.p.rig.draw_on(image, pose, previous, SHADOW)
        return image, layers

    def render(self, frame: int) -> np.ndarray:
        t = frame / self.p.choreography.fps
        exposure = Exposure(
            1.0 + 0.035 * math.sin(2 * math.pi * t / 19.0) + 0.012 * math.sin(2 * math.pi * t / 4.3)
        )
        rng = np.random.default_rng((self.p.script.seed, frame))
        image = self.camera.develop(
            self.scene_image(frame), self.p.choreography.camera(frame), exposure, rng
        )
        image = self.view.warp(image)
        return image if self._look is None else self._look.apply(image, rng)

    def reference(self) -> np.ndarray:
        rng = np.random.default_rng((self.p.script.seed, 10**6))
        return self.camera.develop(
            self.scene.image(REFERENCE_STATE), CameraTransform(), Exposure(), rng
        )


def write_video(
    renderer: FrameRenderer, path: Path, progress: Callable[[int, int], None] | None = None
) -> None:
    chor = renderer.p.choreography
    size = (renderer.view.width_px, renderer.view.height_px)
    fourcc = cv2.VideoWriter.fourcc(*"mp4v")
    writer = cv2.VideoWriter(str(path), fourcc, chor.fps, size)
    if not writer.isOpened():
        raise InputFileError(f"cannot open a video writer for {path}")
    try:
        for frame in range(chor.frame_count):
            writer.write(renderer.render(frame))
            if progress is not None and frame % 300 == 0:
                progress(frame, chor.frame_count)
    finally:
        writer.release()


def write_sidecars(p: Production, out_dir: Path, config_path: Path = DEFAULT_CONFIG) -> None:
    write_truth_csv(p.rows, out_dir / TRUTH_NAME)
    fps = p.choreography.fps
    with open(out_dir / INPUTS_NAME, "w", encoding="utf-8") as handle:
        for item in p.choreography.inputs:
            line = {
                "t_s": round(item.frame / fps, 6),
                "frame": item.frame,
                "kind": item.kind,
                **item.data,
            }
            handle.write(json.dumps(line) + "\n")
    with open(out_dir / EXPECTED_NAME, "w", encoding="utf-8") as handle:
        handle.writelines(json.dumps(decision) + "\n" for decision in p.decisions)
    chor = p.choreography
    meta = {
        "description": "Sample video of the demo pump end-cover station (DEMO DATA, invented)",
        "video": VIDEO_NAME,
        "width_px": p.script.knobs.view.width_px,
        "height_px": p.script.knobs.view.height_px,
        "fps": fps,
        "frame_count": chor.frame_count,
        "duration_s": round(chor.frame_count / fps, 3),
        "seed": p.script.seed,
        "station_config": _relative(config_path),
        "thresholds": {
            "dwell_ms": p.plan.thresholds.dwell_ms,
            "lost_track_grace_ms": p.plan.thresholds.lost_track_grace_ms,
            "hysteresis_px": p.plan.thresholds.hysteresis_px,
        },
        "units": [
            {
                "serial": u.serial,
                "rework": u.rework,
                "note": u.note,
                "start_frame": u.start_frame,
                "end_frame": u.end_frame,
            }
            for u in chor.units
        ],
        "camera_nudges": [
            {
                "frame": n.frame,
                "duration_frames": n.duration_frames,
                "dx_px": n.target.dx_px,
                "dy_px": n.target.dy_px,
                "rot_deg": n.target.rot_deg,
            }
            for n in chor.nudges
        ],
    }
    (out_dir / META_NAME).write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")


def _relative(path: Path) -> str:
    """A path relative to the repository root when it lies inside it."""
    resolved = Path(path).resolve()
    try:
        return resolved.relative_to(REPO_ROOT).as_posix()
    except ValueError:
        return str(resolved)


@dataclass(frozen=True)
class SampleResult:
    video_bytes: int
    render_ms_per_frame: float
    sidecars: tuple[str, ...]


DEFAULT_REFERENCE = REPO_ROOT / "configs" / "demo_station" / "reference.png"
CONTACT_SHEET_NAME = "contact_sheet.png"
ZONES_NAME = "reference_zones.png"


def write_sample(
    p: Production,
    out_dir: Path,
    progress: Callable[[int, int], None] | None = None,
    reference: Path | None = DEFAULT_REFERENCE,
    config_path: Path = DEFAULT_CONFIG,
) -> SampleResult:
    """Video, sidecars, contact sheet and (optionally) the reference frame."""
    from stationcheck.demo_station.contact_sheet import contact_sheet

    renderer = FrameRenderer(p)
    video = out_dir / VIDEO_NAME
    started = time.process_time()
    write_video(renderer, video, progress)
    ms = 1000.0 * (time.process_time() - started) / max(1, p.choreography.frame_count)
    write_sidecars(p, out_dir, config_path)
    _write_png(out_dir / CONTACT_SHEET_NAME, contact_sheet(p, renderer))
    reference_image = renderer.reference()
    _write_png(out_dir / ZONES_NAME, zones_overlay(reference_image, p.plan))
    if reference is not None:
        reference.parent.mkdir(parents=True, exist_ok=True)
        _write_png(reference, reference_image)
    return SampleResult(
        video.stat().st_size,
        ms,
        (TRUTH_NAME, INPUTS_NAME, EXPECTED_NAME, META_NAME, CONTACT_SHEET_NAME, ZONES_NAME),
    )


def zones_overlay(reference: np.ndarray, plan: StationPlan) -> np.ndarray:
    """The reference frame with the config's zones drawn on it (a check that they line up)."""
    out = reference.copy()
    colours = {"fastener": (0, 220, 255), "bin": (80, 220, 80), "check": (255, 160, 60)}
    for zone in plan.zones:
        pts = np.round(np.asarray(zone.polygon_px) * 8).astype(np.int32)
        colour = colours.get(zone.kind, (255, 255, 255))
        cv2.polylines(out, [pts], True, colour, 1, cv2.LINE_AA, 3)
        x0 = int(min(p[0] for p in zone.polygon_px))
        y0 = int(min(p[1] for p in zone.polygon_px))
        cv2.putText(out, zone.id, (x0, y0 - 4), cv2.FONT_HERSHEY_PLAIN, 0.8, colour, 1, cv2.LINE_AA)
    return out


def _write_png(path: Path, image: np.ndarray) -> None:
    if not cv2.imwrite(str(path), image, [cv2.IMWRITE_PNG_COMPRESSION, 9]):
        raise InputFileError(f"cannot write {path}")
