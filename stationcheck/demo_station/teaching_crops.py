"""Teaching frames for the demo station's locking pin (demo data), rendered, not filmed.

The frames come from the demo renderer's still station scene with their own camera noise,
exposures, colour casts, lens fall-off and small camera jitter, and with the unit at every
stage, so none of them is a frame of the sample video: the sample video stays a fair test of
the taught check. Regenerate the committed references (through the same library code as
``stationcheck teach``) with::

    python -m stationcheck.demo_station.teaching_crops configs/demo_station.yaml
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import Camera, CameraTransform, Exposure
from stationcheck.demo_station.files import DEMO_CONFIG
from stationcheck.demo_station.station_scene import Stage, StationScene, StationState
from stationcheck.judgements.presence import LABELS, Label
from stationcheck.judgements.teaching import DEMO_SOURCE
from stationcheck.judgements.zone_window import U8Array

SEED = 4242
GAINS = (0.78, 0.86, 0.94, 1.0, 1.06, 1.14, 1.22, 0.9)
STAGES: tuple[Stage, ...] = ("empty", "gasket", "cover")
NOISE_SIGMA = 2.6


def render_teaching_frames(
    per_class: int = 8, seed: int = SEED
) -> list[tuple[Label, U8Array, str]]:
    """``per_class`` frames with the pin engaged ('present') and as many pulled ('absent')."""
    scene = StationScene()
    rng = np.random.default_rng(seed)
    frames: list[tuple[Label, U8Array, str]] = []
    for k in range(2 * per_class):
        label: Label = "present" if k % 2 == 0 else "absent"
        camera = Camera(
            layout.FRAME_WIDTH_PX,
            layout.FRAME_HEIGHT_PX,
            seed + 100 + k,
            NOISE_SIGMA,
            vignette=float(rng.uniform(0.12, 0.32)),
            light_from=(float(rng.uniform(0.1, 0.9)), float(rng.uniform(0.0, 0.5))),
            falloff=float(rng.uniform(0.05, 0.25)),
        )
        state = StationState(stage=STAGES[k % 3], pin_engaged=label == "present")
        gain = GAINS[(k // 2) % len(GAINS)]
        tint = (
            float(rng.uniform(0.9, 1.1)),
            float(rng.uniform(0.95, 1.05)),
            float(rng.uniform(0.9, 1.1)),
        )
        pose = CameraTransform(
            float(rng.uniform(-1.0, 1.0)),
            float(rng.uniform(-1.0, 1.0)),
            float(rng.uniform(-0.15, 0.15)),
        )
        image = camera.develop(
            scene.image(state), pose, Exposure(gain, tint), np.random.default_rng((seed, k))
        )
        source = (
            f"{DEMO_SOURCE} (seed {seed}, #{k}, gain {gain:.2f}, "
            f"camera dx {pose.dx_px:+.2f} dy {pose.dy_px:+.2f} px)"
        )
        frames.append((label, np.asarray(image, np.uint8), source))
    return frames


def teach_demo_pin(config_path: Path, per_class: int = 8, zone_id: str = "locking_pin") -> str:
    """Forget the zone's references and teach it from freshly rendered frames; a summary."""
    from stationcheck.config import load_config
    from stationcheck.judgements import teaching

    config = load_config(config_path)
    zone = teaching.check_zone(config, zone_id)
    folder = teaching.teaching_dir(config, zone.id)
    teaching.clear(folder)
    frames = render_teaching_frames(per_class)
    size = (config.camera.width_px, config.camera.height_px)
    for label in LABELS:
        chosen = [(image, source) for lab, image, source in frames if lab == label]
        manifest = teaching.teach(folder, zone, label, chosen, size)
    return f"taught {teaching.describe(manifest)} in {folder}"


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description="Teach the demo station's locking pin from rendered frames (demo data)."
    )
    parser.add_argument("config", type=Path, nargs="?", default=DEMO_CONFIG)
    parser.add_argument("--per-class", type=int, default=8)
    args = parser.parse_args(argv)
    print(teach_demo_pin(args.config, args.per_class))
    return 0


if __name__ == "__main__":
    sys.exit(main())
