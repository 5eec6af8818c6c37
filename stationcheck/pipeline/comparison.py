"""A run's decisions against expected ones, and enables outside the target from ground truth.

Matching: decisions of one kind are paired when they agree on their identity (serial, pass and
the kind's key fields, e.g. the zone and attempt of a tightening result), closest in time
first. A pair further apart than its tolerance is a ``timing`` mismatch; a pair whose values
differ (e.g. the failed positions of a unit) is ``differs``; an expected decision with no
partner is ``missing`` and an actual one ``extra``. Enable edges have a tight tolerance
(``edge_tolerance_frames``); the other decisions follow inputs or slow image judgements and
get ``other_tolerance_frames`` (a second at 30 fps). Edge offsets are ``actual - expected`` frames of paired edges.

False enables: frames where the tool was enabled although the physical tip (ground truth) was
neither inside the current target zone nor within the zone map's hysteresis of it, and no
tightening was running (station inputs). Counted as frames and as episodes (runs of frames).
"""

from __future__ import annotations

import statistics
from collections import Counter
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from stationcheck.core.plan import StationPlan
from stationcheck.pipeline.decision_trace import FrameState
from stationcheck.pipeline.expected import Decision
from stationcheck.pipeline.truth_rows import distance_to_polygon_edge, point_in_polygon
from stationcheck.pipeline.truth_sidecar import TruthTable

DEFAULT_EDGE_TOLERANCE_FRAMES = 3
# Inputs decide results and rework marks to the frame; picks, checks and the unit results that
# follow them come from image judgements that wait for the hand to leave and the view to settle.
DEFAULT_OTHER_TOLERANCE_FRAMES = 30

Key = tuple[Any, ...]
# kind -> (identity beyond serial and pass, compared values)
IDENTITY: dict[str, Callable[[Mapping[str, Any]], Key]] = {
    "enable": lambda d: (d.get("on"), d.get("zone")),
    "position_result": lambda d: (d.get("zone"), d.get("attempt")),
    "rework_mark": lambda d: (d.get("zone"),),
    "step_done": lambda d: (d.get("step"),),
    "check_result": lambda d: (d.get("step"),),
    "unit_result": lambda d: (),
    "alarm": lambda d: (d.get("alarm"), d.get("zone")),
}
VALUES: dict[str, Callable[[Mapping[str, Any]], Key]] = {
    "enable": lambda d: (),
    "position_result": lambda d: (d.get("ok"),),
    "rework_mark": lambda d: (),
    "step_done": lambda d: (sorted(d.get("failed") or []),),
    "check_result": lambda d: (d.get("passed"),),
    "unit_result": lambda d: (d.get("result"), sorted(d.get("failed") or [])),
    "alarm": lambda d: (),
}


@dataclass(frozen=True)
class Mismatch:
    kind: str
    problem: str  # missing, extra, differs, timing
    serial: str | None
    pass_no: int
    expected_frame: int | None
    actual_frame: int | None
    detail: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "problem": self.problem,
            "serial": self.serial,
            "pass": self.pass_no,
            "expected_frame": self.expected_frame,
            "actual_frame": self.actual_frame,
            "detail": self.detail,
        }


@dataclass
class Comparison:
    mismatches: list[Mismatch] = field(default_factory=list)
    edge_offsets_frames: list[int] = field(default_factory=list)
    matched: Counter[str] = field(default_factory=Counter)
    offsets_by_kind: dict[str, list[int]] = field(default_factory=dict)  # paired, actual - expected

    @property
    def mismatches_by_kind(self) -> dict[str, int]:
        return dict(sorted(Counter(m.kind for m in self.mismatches).items()))

    @property
    def edge_offset_median(self) -> float | None:
        offsets = [abs(o) for o in self.edge_offsets_frames]
        return float(statistics.median(offsets)) if offsets else None

    @property
    def edge_offset_max(self) -> int | None:
        offsets = [abs(o) for o in self.edge_offsets_frames]
        return max(offsets) if offsets else None


def _describe(decision: Decision) -> str:
    fields = ", ".join(f"{k}={v}" for k, v in decision.data.items() if v not in (None, [], ""))
    return f"{decision.kind} {fields}".strip()


def compare_decisions(
    expected: Sequence[Decision],
    actual: Sequence[Decision],
    *,
    edge_tolerance_frames: int = DEFAULT_EDGE_TOLERANCE_FRAMES,
    other_tolerance_frames: int = DEFAULT_OTHER_TOLERANCE_FRAMES,
) -> Comparison:
    result = Comparison()
    groups: dict[Key, tuple[list[Decision], list[Decision]]] = {}
    for side, decisions in enumerate((expected, actual)):
        for decision in decisions:
            key = (
                decision.kind,
                decision.serial,
                decision.pass_no,
                *IDENTITY[decision.kind](decision.data),
            )
            groups.setdefault(key, ([], []))[side].append(decision)
    for (kind, serial, pass_no, *_), (wanted, got) in groups.items():
        tolerance = edge_tolerance_frames if kind == "enable" else other_tolerance_frames
        pairs = sorted(
            (
                (abs(a.frame - e.frame), i, j)
                for i, e in enumerate(wanted)
                for j, a in enumerate(got)
            ),
        )
        used_e: set[int] = set()
        used_a: set[int] = set()
        for distance, i, j in pairs:
            if i in used_e or j in used_a:
                continue
            used_e.add(i)
            used_a.add(j)
            e, a = wanted[i], got[j]
            result.offsets_by_kind.setdefault(kind, []).append(a.frame - e.frame)
            if distance > tolerance:
                result.mismatches.append(
                    Mismatch(
                        kind,
                        "timing",
                        serial,
                        pass_no,
                        e.frame,
                        a.frame,
                        f"{_describe(e)}: {a.frame - e.frame:+d} frames (tolerance {tolerance})",
                    )
                )
            elif VALUES[kind](e.data) != VALUES[kind](a.data):
                result.mismatches.append(
                    Mismatch(
                        kind,
                        "differs",
                        serial,
                        pass_no,
                        e.frame,
                        a.frame,
                        f"expected {_describe(e)}; got {_describe(a)}",
                    )
                )
            else:
                result.matched[kind] += 1
                if kind == "enable":
                    result.edge_offsets_frames.append(a.frame - e.frame)
        for i, e in enumerate(wanted):
            if i not in used_e:
                result.mismatches.append(
                    Mismatch(kind, "missing", serial, pass_no, e.frame, None, _describe(e))
                )
        for j, a in enumerate(got):
            if j not in used_a:
                result.mismatches.append(
                    Mismatch(kind, "extra", serial, pass_no, None, a.frame, _describe(a))
                )
    result.mismatches.sort(
        key=lambda m: min(f for f in (m.expected_frame, m.actual_frame) if f is not None)
    )
    return result


@dataclass(frozen=True)
class FalseEnables:
    frames: int
    episodes: tuple[tuple[int, int], ...]  # first and last frame of each run

    def to_dict(self) -> dict[str, Any]:
        return {
            "frames": self.frames,
            "episodes": len(self.episodes),
            "episode_frames": [list(e) for e in self.episodes],
        }


def truly_at_target(row: Any, polygon: Any, hysteresis_px: float) -> bool:
    """The false-enable rule's one test: the true tip (``row`` of the truth table) is inside the
    target zone or within ``hysteresis_px`` of its edge. No row or no target counts as away."""
    if row is None or polygon is None:
        return False
    tip = (row.tip_ref_x_px, row.tip_ref_y_px)
    return point_in_polygon(tip, polygon) or distance_to_polygon_edge(tip, polygon) <= hysteresis_px


def count_false_enables(
    states: Iterable[FrameState], truth: TruthTable, plan: StationPlan
) -> FalseEnables:
    polygons = {zone.id: zone.polygon_px for zone in plan.zones}
    hysteresis_px = plan.thresholds.hysteresis_px
    bad: list[int] = []
    for state in states:
        if not state.enabled or state.running:
            continue
        if truly_at_target(
            truth.rows.get(state.frame_index), polygons.get(state.target_zone or ""), hysteresis_px
        ):
            continue
        bad.append(state.frame_index)
    episodes: list[tuple[int, int]] = []
    for frame in bad:
        if episodes and frame == episodes[-1][1] + 1:
            episodes[-1] = (episodes[-1][0], frame)
        else:
            episodes.append((frame, frame))
    return FalseEnables(frames=len(bad), episodes=tuple(episodes))


def restrict_to_frames(decisions: Iterable[Decision], first: int, last: int) -> list[Decision]:
    """Expected decisions of a frame range (a run over part of a recording)."""
    return [d for d in decisions if first <= d.frame <= last]
