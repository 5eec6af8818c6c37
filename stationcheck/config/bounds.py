"""Every timing and threshold of the station config: a hard range and a sane range, with why.

A value outside its hard range is an error (the station could enable the tool where it should
not, or never at all); outside its sane range it is a warning (it works, but is probably not
what was meant). The hard check runs while the schema validates (so every way of reading a
config refuses the value); the sane check is a lint over the file's data. ``stationcheck check``,
the setup screen's findings and ``stationcheck run`` all go through both.

Ranges are common practice for a camera at 25-60 frames/s watching a handheld tool (no source);
the reasons say what goes wrong beyond them.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

from pydantic import AfterValidator
from pydantic_core import PydanticCustomError

from stationcheck.config.error_wording import Location
from stationcheck.config.findings import Finding, warning


@dataclass(frozen=True)
class Bound:
    low: float
    high: float
    sane_low: float
    sane_high: float
    unit: str
    too_low: str  # what goes wrong below the range
    too_high: str  # what goes wrong above it

    def __post_init__(self) -> None:
        if not self.low <= self.sane_low <= self.sane_high <= self.high:
            raise ValueError(f"bound ranges must nest, got {self}")

    def show(self, value: float) -> str:
        return f"{value:g}{self.unit}"


_GRACE_HIGH = "the tool stays enabled this long while the tip is out of view"
_STALE_HIGH = "the tool stays enabled this long on a stopped or frozen camera"
_MAX_RUN = Bound(
    100.0,
    60000.0,
    500.0,
    10000.0,
    " ms",
    "ordinary tightenings are cut off before they finish",
    "a stuck tool-running signal keeps the tool enabled this long",
)

BOUNDS: dict[str, Bound] = {
    "model.min_score": Bound(
        0.05,
        0.99,
        0.3,
        0.9,
        "",
        "a guess on an empty bench would count as the tip (at 0 every frame has a tip)",
        "the calibrated score rarely gets there: the tool would hardly ever count as seen",
    ),
    "thresholds.dwell_ms": Bound(
        0.0,
        5000.0,
        100.0,
        1000.0,
        " ms",
        "a tip passing over a position on its way elsewhere may enable the tool",
        "the operator waits at every position before the tool may run",
    ),
    "thresholds.lost_track_grace_ms": Bound(
        0.0, 1000.0, 0.0, 500.0, " ms", "a single missed detection drops the enable", _GRACE_HIGH
    ),
    "thresholds.hysteresis_px": Bound(
        0.0,
        50.0,
        1.0,
        15.0,
        " px",
        "detector jitter on a zone edge makes the enable flicker",
        "the tip counts as inside a position while clearly beside it",
    ),
    "thresholds.stale_frame_ms": Bound(
        20.0,
        1000.0,
        60.0,
        200.0,
        " ms",
        "normal frame-time jitter (two frame periods at 30 frames/s) raises it",
        _STALE_HIGH,
    ),
    "thresholds.max_run_ms": _MAX_RUN,
    "steps[].max_run_ms": _MAX_RUN,
    "steps[].min_time_ms": Bound(
        0.0,
        10000.0,
        100.0,
        3000.0,
        " ms",
        "a hand brushing past a bin counts as a pick",
        "the operator waits in the bin before the step completes",
    ),
    "plc.timeout_ms": Bound(
        5.0,
        2000.0,
        10.0,
        200.0,
        " ms",
        "a busy PLC's ordinary answer time counts as a lost link",
        "a frozen PLC is noticed only after (retries + 3) times this",
    ),
    "judgements.bin_activity.settle_ms": Bound(
        0.0, 10000.0, 0.0, 2000.0, " ms", "", "a pick is noticed this late"
    ),
    "judgements.bin_activity.release_ms": Bound(
        0.0, 10000.0, 0.0, 2000.0, " ms", "", "a bin stays active this long after the hand left"
    ),
    "judgements.bin_activity.tool_reach_px": Bound(
        0.0,
        2000.0,
        0.0,
        300.0,
        " px",
        "",
        "a tool tip far from the bin still lets the bin's activity count as a reach",
    ),
    "judgements.presence.confirm_ms": Bound(
        0.0, 10000.0, 0.0, 2000.0, " ms", "", "a check verdict comes this late"
    ),
    "judgements.camera_shift.interval_ms": Bound(
        0.0,
        10000.0,
        0.0,
        1000.0,
        " ms",
        "",
        "a bumped camera is noticed only after about twice this",
    ),
}


def hard(key: str) -> AfterValidator:
    """A schema validator refusing a value outside ``BOUNDS[key]``'s hard range, with why."""
    bound = BOUNDS[key]

    def check(value: float) -> float:
        reason = _hard_problem(bound, value)
        if reason is not None:
            raise PydanticCustomError("hard_range", reason)
        return value

    return AfterValidator(check)


def _hard_problem(bound: Bound, value: float) -> str | None:
    if not math.isfinite(value):
        return f"must be a finite number, got {value}"
    if value < bound.low:
        return (
            f"{bound.show(value)} is below the allowed {bound.show(bound.low)}"
            f"{_because(bound.too_low)}"
        )
    if value > bound.high:
        return (
            f"{bound.show(value)} is above the allowed {bound.show(bound.high)}: {bound.too_high}"
        )
    return None


def _because(reason: str) -> str:
    return f": {reason}" if reason else ""


def lint_bounds(data: Any) -> list[Finding]:
    """Warnings for values inside the hard range but outside the sane one."""
    findings: list[Finding] = []
    for key, path, value in _values(data):
        bound = BOUNDS[key]
        if _hard_problem(bound, value) is not None:
            continue  # the schema reports it as an error
        if value < bound.sane_low:
            findings.append(
                warning(
                    path,
                    f"{bound.show(value)} is below the usual "
                    f"{bound.show(bound.sane_low)}{_because(bound.too_low)}",
                )
            )
        elif value > bound.sane_high:
            findings.append(
                warning(
                    path,
                    f"{bound.show(value)} is above the usual "
                    f"{bound.show(bound.sane_high)}: {bound.too_high}",
                )
            )
    return findings


def _values(data: Any) -> Iterator[tuple[str, Location, float]]:
    if not isinstance(data, dict):
        return
    for key in BOUNDS:
        if key.startswith("steps[]."):
            field = key.removeprefix("steps[].")
            steps = data.get("steps")
            for index, step in enumerate(steps if isinstance(steps, list) else []):
                value: Any = step.get(field) if isinstance(step, dict) else None
                if _is_number(value):
                    yield key, ("steps", index, field), float(value)
            continue
        node: Any = data
        parts = key.split(".")
        for part in parts:
            node = node.get(part) if isinstance(node, dict) else None
        if _is_number(node):
            yield key, tuple(parts), float(node)


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)
