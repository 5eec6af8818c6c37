"""``stationcheck eval --looks``: a keypoint model's figures on the held-out camera looks."""

from __future__ import annotations

import json
import sys
from typing import Any

from stationcheck.vision.detector import KeypointDetector

# What the bundled model is held to on a held-out look (a look marked as a target).
TARGET_MISS_RATE = 0.05
TARGET_TIP_P95_PX = 6.0


def meets_target(figures: dict[str, Any]) -> bool:
    p95, miss = figures.get("tip_p95_px"), figures.get("miss_rate")
    return (
        p95 is not None
        and miss is not None
        and p95 <= TARGET_TIP_P95_PX
        and (miss <= TARGET_MISS_RATE)
    )


def run_looks(
    detector: KeypointDetector,
    min_score: float,
    as_json: bool,
    names: list[str] | None = None,
    max_frames: int | None = None,
) -> int:
    """Renders each held-out look's clip, evaluates the detector on it and prints a table."""
    from stationcheck.demo_station.held_out_looks import HELD_OUT_LOOKS
    from stationcheck.demo_station.look_clips import LOOKS_SCENE, look_clip
    from stationcheck.errors import InputFileError
    from stationcheck.evaluation.accuracy_report import evaluate

    looks = HELD_OUT_LOOKS
    if names:
        known = {look.name for look in looks}
        unknown = [n for n in names if n not in known]
        if unknown:
            raise InputFileError(f"--look {unknown[0]!r}: held-out looks are {sorted(known)}")
        looks = tuple(look for look in looks if look.name in names)
    rows = []
    for look in looks:
        print(f"rendering and evaluating '{look.name}' ...", file=sys.stderr, flush=True)
        report = evaluate(detector, look_clip(look, max_frames), min_score=min_score)
        figures = report.as_dict()
        figures.update(
            look=look.name,
            target=look.target,
            meets_target=meets_target(figures) if look.target else None,
        )
        rows.append(figures)
    if as_json:
        print(
            json.dumps(
                {
                    "scene": LOOKS_SCENE.name,
                    "target": {"miss_rate": TARGET_MISS_RATE, "tip_p95_px": TARGET_TIP_P95_PX},
                    "looks": rows,
                }
            )
        )
        return 0
    print(
        f"held-out looks ({LOOKS_SCENE.name}, demo data); detected = score >= {min_score:g}; "
        f"target: miss <= {TARGET_MISS_RATE:.0%}, tip p95 <= {TARGET_TIP_P95_PX:g} px"
    )
    print(
        f"{'look':<16} {'frames':>6} {'median px':>9} {'p95 px':>7} {'miss':>6} {'false':>6}  met"
    )
    for r in rows:
        met = "-" if r["meets_target"] is None else ("yes" if r["meets_target"] else "NO")
        print(
            f"{r['look']:<16} {r['frames']:>6} {_num(r['tip_median_px']):>9} "
            f"{_num(r['tip_p95_px']):>7} {_pct(r['miss_rate']):>6} "
            f"{_pct(r['false_detection_rate']):>6}  {met}"
        )
    return 0


def _num(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.2f}"


def _pct(value: float | None) -> str:
    return "n/a" if value is None else f"{100 * value:.1f}%"
