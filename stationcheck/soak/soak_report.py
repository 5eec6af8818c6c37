"""What a soak found: frames, false enables, and fault-to-inhibit times per fault kind."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from stationcheck.soak.faults import DETECTABLE, KINDS


@dataclass
class FaultRecord:
    kind: str
    start_t_s: float
    end_t_s: float
    detect_t_s: float | None  # None: ended before it could be known (or not an inhibit fault)
    enabled_at_start: bool = False
    enabled_at_detect: bool = False  # the enable was still on when it became detectable
    inhibit_ms: float | None = None  # detectable -> enable off (0 when already off)
    ended: bool = False
    ignored: bool = False  # result_repeated: the repeat was recognised and changed nothing


@dataclass
class SoakReport:
    keypoints: str
    bound_ms: float
    seed: int
    frames: int = 0
    wall_s: float = 0.0
    enabled_frames: int = 0
    false_enables: int = 0
    enabled_in_fault_window: int = 0
    false_enable_frames: list[tuple[int, str]] = field(default_factory=list)
    faults: list[FaultRecord] = field(default_factory=list)

    @property
    def fps(self) -> float:
        return self.frames / self.wall_s if self.wall_s > 0 else 0.0

    def per_kind(self) -> dict[str, dict[str, Any]]:
        out: dict[str, dict[str, Any]] = {}
        for kind in KINDS:
            records = [r for r in self.faults if r.kind == kind]
            measured = [r.inhibit_ms for r in records if r.inhibit_ms is not None]
            needed = [
                r.inhibit_ms for r in records if r.inhibit_ms is not None and r.enabled_at_detect
            ]
            row: dict[str, Any] = {
                "injected": len(records),
                "detectable": sum(r.detect_t_s is not None for r in records),
                "enabled_at_detectable": len(needed),
                "over_bound": sum(m > self.bound_ms for m in measured),
                "detectable_when": DETECTABLE[kind],
            }
            values = needed or measured
            if values:
                p50, p99 = np.percentile(values, [50, 99])
                row.update(
                    p50_ms=round(float(p50), 1),
                    p99_ms=round(float(p99), 1),
                    max_ms=round(max(values), 1),
                )
            if kind == "result_repeated":
                row["ignored"] = sum(r.ignored for r in records)
            out[kind] = row
        return out

    @property
    def over_bound(self) -> int:
        return sum(row["over_bound"] for row in self.per_kind().values())

    @property
    def passed(self) -> bool:
        return self.false_enables == 0 and self.over_bound == 0

    def to_dict(self) -> dict[str, Any]:
        return {
            "frames": self.frames,
            "wall_s": round(self.wall_s, 2),
            "frames_per_s": round(self.fps, 1),
            "keypoints": self.keypoints,
            "seed": self.seed,
            "enabled_frames": self.enabled_frames,
            "false_enables": self.false_enables,
            "enabled_in_fault_window": self.enabled_in_fault_window,
            "false_enable_frames": self.false_enable_frames[:50],
            "bound_ms": self.bound_ms,
            "over_bound": self.over_bound,
            "passed": self.passed,
            "faults": self.per_kind(),
        }

    def lines(self) -> list[str]:
        head = (
            f"{self.frames} frames in {self.wall_s:.1f} s ({self.fps:.0f} frames/s), "
            f"keypoints: {self.keypoints}, seed {self.seed}; enabled in "
            f"{self.enabled_frames} frames"
        )
        window = (
            f"false enables: {self.false_enables}; enabled with the tip away in a "
            f"fault's window (before detectable + bound): "
            f"{self.enabled_in_fault_window} frames"
        )
        title = (
            f"fault-to-inhibit (ms, from the moment it became detectable, faults that "
            f"found the enable on; bound {self.bound_ms:.0f} ms):"
        )
        columns = f"  {'kind':<20}{'injected':>9}{'on':>5}{'p50':>8}{'p99':>8}{'max':>8}{'over':>6}"
        lines = [head, window, title, columns]
        for kind, row in self.per_kind().items():
            figures = "".join(
                f"{row.get(key, float('nan')):>8.1f}" for key in ("p50_ms", "p99_ms", "max_ms")
            )
            lines.append(
                f"  {kind:<20}{row['injected']:>9}{row['enabled_at_detectable']:>5}"
                f"{figures}{row['over_bound']:>6}"
            )
        lines.append("PASSED" if self.passed else "FAILED")
        return lines
