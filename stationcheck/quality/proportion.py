"""Confidence intervals for a proportion (e.g. the first-time-through rate)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist


@dataclass(frozen=True)
class Interval:
    low: float
    high: float

    def __post_init__(self) -> None:
        if not (math.isfinite(self.low) and math.isfinite(self.high)) or self.low > self.high:
            raise ValueError(f"Interval needs finite low <= high, got {self.low!r}, {self.high!r}")


def wilson_interval(successes: int, trials: int, confidence: float = 0.95) -> Interval:
    """Wilson score interval (Wilson, JASA 1927): unlike the plain normal interval it stays
    inside [0, 1] and behaves at rates near 0 or 1 and for few units."""
    if trials < 1:
        raise ValueError(f"wilson_interval needs trials >= 1, got {trials!r}")
    if not 0 <= successes <= trials:
        raise ValueError(
            f"wilson_interval needs 0 <= successes <= trials, got {successes!r} of {trials!r}"
        )
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be in (0, 1), got {confidence!r}")
    z = NormalDist().inv_cdf(0.5 + confidence / 2.0)
    n, p = float(trials), successes / trials
    z2n = z * z / n
    centre = (p + z2n / 2.0) / (1.0 + z2n)
    half = z * math.sqrt(p * (1.0 - p) / n + z2n / (4.0 * n)) / (1.0 + z2n)
    low = 0.0 if successes == 0 else max(0.0, centre - half)  # exact at the ends
    high = 1.0 if successes == trials else min(1.0, centre + half)
    return Interval(low, high)
