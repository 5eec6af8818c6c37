"""The faults a soak injects, when each becomes detectable, and a random schedule of them.

Faults are injected where the frame path takes its inputs: the picture (frozen, black), the
detector's answer (blur, occluded tip, camera moved, NaN output), the frame clock (stall), and
the station inputs (link drop, PLC freeze, tool running stuck, odd result sequences, reset).
Each kind states the moment from which the station could know about it (``DETECTABLE``); the
enable must be off within the bound after that moment.
"""

from __future__ import annotations

import math
import random
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Literal

Trigger = Literal["any", "enabled", "running"]

KINDS: tuple[str, ...] = (
    "frozen_image",
    "stall",
    "black_frames",
    "heavy_blur",
    "tip_occluded",
    "camera_moved",
    "nan_output",
    "link_drop",
    "plc_freeze",
    "tool_running_stuck",
    "result_repeated",
    "result_jump",
    "reset_during_run",
)

DETECTABLE: dict[str, str] = {
    "frozen_image": "last changed frame + stale_frame_ms (the picture has not changed that long)",
    "stall": "last frame + stale_frame_ms (no new frame that long)",
    "black_frames": "first black frame + stale_frame_ms (a black picture does not change; the "
    "tip is unseen too, which the lost-track grace would catch later)",
    "heavy_blur": "start + lost_track_grace_ms (the blurred tip scores below min_score)",
    "tip_occluded": "start + lost_track_grace_ms (an occlusion shorter than the grace is "
    "allowed and ends undetectable)",
    "camera_moved": "start + interval_ms x confirm_checks of the camera-shift judgement",
    "nan_output": "the first frame with unusable model output",
    "link_drop": "start (the failed request)",
    "plc_freeze": "start + the link timeout ((retries + 3) x timeout_ms)",
    "tool_running_stuck": "the run's start + max_run_ms for a granted run; at once when it "
    "starts while inhibited (a run without a grant never enables)",
    "result_repeated": "not an inhibit fault: a repeated sequence number must change nothing",
    "result_jump": "start (a new sequence number is a new result: the attempt ends)",
    "reset_during_run": "start (a reset forgets every grant)",
}

# (shortest, longest) duration in ms; 0 = a single injected input
DURATION_MS: dict[str, tuple[float, float]] = {
    "frozen_image": (50.0, 3000.0),
    "stall": (50.0, 3000.0),
    "black_frames": (50.0, 2000.0),
    "heavy_blur": (100.0, 2000.0),
    "tip_occluded": (50.0, 1500.0),
    "camera_moved": (500.0, 3000.0),
    "nan_output": (33.0, 1000.0),
    "link_drop": (50.0, 2000.0),
    "plc_freeze": (50.0, 2000.0),
    "tool_running_stuck": (1000.0, 8000.0),
    "result_repeated": (0.0, 0.0),
    "result_jump": (0.0, 0.0),
    "reset_during_run": (0.0, 0.0),
}

TRIGGER: dict[str, Trigger] = {
    kind: ("running" if kind == "reset_during_run" else "enabled") for kind in KINDS
}


@dataclass(frozen=True)
class PlannedFault:
    kind: str
    gap_s: float  # armed this long after the previous fault ended
    duration_ms: float
    trigger: Trigger  # then waits for this (at most ``TRIGGER_WAIT_S``) before it starts
    shift_px: tuple[float, float] = (0.0, 0.0)  # camera_moved: how far the picture moved


TRIGGER_WAIT_S = 20.0


def fault_stream(
    seed: int, gap_s: tuple[float, float] = (0.5, 4.0), any_share: float = 0.3
) -> Iterator[PlannedFault]:
    """Endless faults with random kinds, gaps, lengths and shifts; ``any_share`` of them start
    as soon as armed, the rest wait for their trigger (the enable on, or a run)."""
    rng = random.Random(seed)
    while True:
        kind = rng.choice(KINDS)
        low, high = DURATION_MS[kind]
        trigger = TRIGGER[kind] if rng.random() >= any_share else "any"
        shift = (0.0, 0.0)
        if kind == "camera_moved":
            size, angle = rng.uniform(6.0, 20.0), rng.uniform(0.0, 2 * math.pi)
            shift = (size * math.cos(angle), size * math.sin(angle))
        yield PlannedFault(kind, rng.uniform(*gap_s), rng.uniform(low, high), trigger, shift)
