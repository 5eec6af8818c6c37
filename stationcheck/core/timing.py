"""Comparing durations computed from float timestamps.

Frame times such as ``i / 30`` do not subtract exactly (14/30 - 4/30 = 0.30000000000000004), so
a duration within a microsecond of a limit counts as having reached it.
"""

from __future__ import annotations

TOLERANCE_MS = 1e-3


def elapsed_ms(since_t_s: float, now_t_s: float) -> float:
    return (now_t_s - since_t_s) * 1000.0


def reached(duration_ms: float, limit_ms: float) -> bool:
    """True once ``duration_ms`` has reached ``limit_ms`` (within the tolerance)."""
    return duration_ms >= limit_ms - TOLERANCE_MS


def exceeded(duration_ms: float, limit_ms: float) -> bool:
    """True once ``duration_ms`` is clearly past ``limit_ms`` (beyond the tolerance)."""
    return duration_ms > limit_ms + TOLERANCE_MS
