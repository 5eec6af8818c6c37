"""Control charts for individual values: EWMA and tabular CUSUM, plus the process sigma estimated
from moving ranges. Pure functions over sequences of floats; no I/O."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import pairwise
from typing import Literal

# d2 for moving ranges of two normal values: E|X1 - X2| = 2 sigma / sqrt(pi)
D2_MOVING_RANGE = 2.0 / math.sqrt(math.pi)
LimitMode = Literal["exact", "asymptotic"]


def _require_values(values: Sequence[float], name: str) -> None:
    for i, value in enumerate(values):
        if not math.isfinite(value):
            raise ValueError(f"{name}: value {i} is not a finite number ({value!r})")


def _require_positive(name: str, value: float) -> None:
    if not (math.isfinite(value) and value > 0.0):
        raise ValueError(f"{name} must be a positive number, got {value!r}")


def moving_range_sigma(values: Sequence[float]) -> float:
    """Short-term sigma of individual values: mean moving range / d2. Unlike the plain
    standard deviation it is barely inflated by a slow drift, which is what the charts look for."""
    _require_values(values, "moving_range_sigma")
    if len(values) < 2:
        raise ValueError(f"moving_range_sigma needs at least 2 values, got {len(values)}")
    ranges = [abs(b - a) for a, b in pairwise(values)]
    return sum(ranges) / len(ranges) / D2_MOVING_RANGE


@dataclass(frozen=True)
class EwmaChart:
    """EWMA statistic per value with its control limits; ``signals`` are the indices whose
    statistic lies outside its limits."""

    target: float
    sigma: float
    weight: float  # lambda
    width: float  # L, in sigmas of the statistic
    statistics: tuple[float, ...]
    lower: tuple[float, ...]
    upper: tuple[float, ...]
    signals: tuple[int, ...]


def ewma_chart(
    values: Sequence[float],
    target: float,
    sigma: float,
    weight: float = 0.2,
    width: float = 3.0,
    limits: LimitMode = "exact",
) -> EwmaChart:
    """z_t = weight * x_t + (1 - weight) * z_{t-1}, z_0 = target (Roberts 1959).

    ``exact`` limits widen towards the asymptotic ones over the first values:
    target +- width * sigma * sqrt(weight / (2 - weight) * (1 - (1 - weight)^(2t)));
    ``asymptotic`` uses the limit t -> infinity from the first value on.
    """
    _require_values(values, "ewma_chart")
    _require_positive("sigma", sigma)
    if not 0.0 < weight <= 1.0:
        raise ValueError(f"weight (lambda) must be in (0, 1], got {weight!r}")
    _require_positive("width", width)
    if limits not in ("exact", "asymptotic"):
        raise ValueError(f"limits must be 'exact' or 'asymptotic', got {limits!r}")
    statistics: list[float] = []
    lower: list[float] = []
    upper: list[float] = []
    signals: list[int] = []
    z = target
    ratio = weight / (2.0 - weight)
    for t, value in enumerate(values, start=1):
        z = weight * value + (1.0 - weight) * z
        factor = ratio if limits == "asymptotic" else ratio * (1.0 - (1.0 - weight) ** (2 * t))
        half = width * sigma * math.sqrt(factor)
        statistics.append(z)
        lower.append(target - half)
        upper.append(target + half)
        if not target - half <= z <= target + half:
            signals.append(t - 1)
    return EwmaChart(
        target, sigma, weight, width, tuple(statistics), tuple(lower), tuple(upper), tuple(signals)
    )


@dataclass(frozen=True)
class CusumChart:
    """Tabular CUSUM: upper sums S_hi and lower sums S_lo per value; ``signals`` are the
    indices where either exceeds the decision interval ``h``."""

    target: float
    k: float
    h: float
    upper_sums: tuple[float, ...]
    lower_sums: tuple[float, ...]
    signals: tuple[int, ...]

    @property
    def first_signal(self) -> int | None:
        return self.signals[0] if self.signals else None


def cusum_chart(values: Sequence[float], target: float, k: float, h: float) -> CusumChart:
    """S_hi(i) = max(0, S_hi(i-1) + x_i - target - k), S_lo(i) = max(0, S_lo(i-1) + target - k -
    x_i), both from 0 (Page 1954); ``k`` (reference value) and ``h`` (decision interval) are in the
    units of the values, e.g. k = sigma / 2 and h = 4 or 5 sigma."""
    _require_values(values, "cusum_chart")
    if not (math.isfinite(k) and k >= 0.0):
        raise ValueError(f"k must be a number >= 0, got {k!r}")
    _require_positive("h", h)
    s_hi = s_lo = 0.0
    upper: list[float] = []
    lower: list[float] = []
    signals: list[int] = []
    for i, value in enumerate(values):
        s_hi = max(0.0, s_hi + value - target - k)
        s_lo = max(0.0, s_lo + target - k - value)
        upper.append(s_hi)
        lower.append(s_lo)
        if s_hi > h or s_lo > h:
            signals.append(i)
    return CusumChart(target, k, h, tuple(upper), tuple(lower), tuple(signals))
