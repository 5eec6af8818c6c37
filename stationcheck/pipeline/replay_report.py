"""What a replay says at the end: per-unit summary, comparison figures, speed, where files are."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from stationcheck.pipeline.comparison import Comparison, FalseEnables
from stationcheck.pipeline.frame_loop import LoopStats
from stationcheck.pipeline.summary import UnitPass, format_unit_table

MAX_MISMATCHES_SHOWN = 50


@dataclass
class ReplayReport:
    mode: str  # "video" or "observations"
    source: str
    config_path: str
    detector: str
    judgements: str
    first_frame: int
    last_frame: int
    stats: LoopStats
    units: list[UnitPass]
    comparison: Comparison | None
    false_enables: FalseEnables | None
    log_path: str
    events: int
    annotated_video: str | None = None
    observations_path: str | None = None

    @property
    def fps(self) -> float:
        return self.stats.pipeline_fps()

    def to_json(self) -> dict[str, Any]:
        comparison = self.comparison
        out: dict[str, Any] = {
            "mode": self.mode,
            "source": self.source,
            "config": self.config_path,
            "detector": self.detector,
            "judgements": self.judgements,
            "frames": self.stats.frames,
            "first_frame": self.first_frame,
            "last_frame": self.last_frame,
            "units": [unit.to_dict() for unit in self.units],
            "false_enables": self.false_enables.frames if self.false_enables else None,
            "false_enable_episodes": len(self.false_enables.episodes)
            if self.false_enables
            else None,
            "false_enable_frames": (
                [list(e) for e in self.false_enables.episodes] if self.false_enables else None
            ),
            "mismatches": len(comparison.mismatches) if comparison else None,
            "mismatches_by_kind": comparison.mismatches_by_kind if comparison else None,
            "mismatch_details": (
                [m.to_dict() for m in comparison.mismatches[:MAX_MISMATCHES_SHOWN]]
                if comparison
                else None
            ),
            "matched_by_kind": dict(sorted(comparison.matched.items())) if comparison else None,
            "edge_offset_frames_median": comparison.edge_offset_median if comparison else None,
            "edge_offset_frames_max": comparison.edge_offset_max if comparison else None,
            "edge_offsets_frames": comparison.edge_offsets_frames if comparison else None,
            "offsets_frames_by_kind": comparison.offsets_by_kind if comparison else None,
            "fps": round(self.fps, 1),
            "wall_fps": round(self.stats.fps, 1),
            "wall_s": round(self.stats.wall_s, 2),
            "stage_ms_median": {k: round(v, 3) for k, v in self.stats.medians_ms().items()},
            "log_path": self.log_path,
            "events": self.events,
            "inputs_not_applied": self.stats.inputs_not_applied,
            "annotated_video": self.annotated_video,
            "observations": self.observations_path,
        }
        return out

    def text_lines(self) -> list[str]:
        lines = [f"units ({len(self.units)} passes):"]
        lines += ["  " + line for line in format_unit_table(self.units)]
        comparison = self.comparison
        if self.false_enables is not None:
            fe = self.false_enables
            lines.append(
                f"false enables: {fe.frames} frames in {len(fe.episodes)} episodes "
                "(tool enabled away from the target, from the ground truth)"
            )
        if comparison is not None:
            lines.append(
                f"expected decisions: {sum(comparison.matched.values())} matched, "
                f"{len(comparison.mismatches)} mismatches"
            )
            for mismatch in comparison.mismatches[:MAX_MISMATCHES_SHOWN]:
                frames = "/".join(
                    str(f) if f is not None else "-"
                    for f in (mismatch.expected_frame, mismatch.actual_frame)
                )
                lines.append(
                    f"  {mismatch.problem:<8} {mismatch.kind:<15} "
                    f"{mismatch.serial or '-':<10} frame {frames:<11} {mismatch.detail}"
                )
            if comparison.edge_offset_median is not None:
                lines.append(
                    f"enable edges: offset median {comparison.edge_offset_median:g} "
                    f"frames, max {comparison.edge_offset_max} frames "
                    f"({len(comparison.edge_offsets_frames)} edges paired)"
                )
        stages = ", ".join(f"{k} {v:.2f}" for k, v in self.stats.medians_ms().items())
        lines.append(
            f"speed: {self.fps:.0f} frames/s through the whole decision path "
            f"({self.stats.frames} frames, {self.stats.wall_s:.1f} s wall)"
        )
        if stages:
            lines.append(f"  median ms per frame: {stages}")
        lines.append(f"detector: {self.detector}; image judgements: {self.judgements}")
        if self.stats.inputs_not_applied:
            lines.append(
                f"{self.stats.inputs_not_applied} station inputs lie after the last "
                "frame processed and were left out"
            )
        lines.append(f"step log: {self.log_path} ({self.events} events)")
        if self.annotated_video:
            lines.append(f"annotated video: {self.annotated_video}")
        if self.observations_path:
            lines.append(f"observations: {self.observations_path}")
        return lines
