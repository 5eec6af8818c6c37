"""The One Euro filter (Casiez, Roussel, Vogel, CHI 2012) as pure functions of timestamps.

An adaptive low-pass filter: slow movement is smoothed hard (jitter goes away), fast movement
raises the cutoff (lag stays small). With the sampling period ``Te`` from the timestamps:

    tau   = 1 / (2 * pi * fc)              alpha = 1 / (1 + tau / Te)
    dx    = (x - x_hat_prev) / Te          dx_hat = alpha(d_cutoff) * dx + (1 - ...) * dx_hat_prev
    fc    = min_cutoff + beta * |dx_hat|   x_hat  = alpha(fc) * x + (1 - alpha(fc)) * x_hat_prev

The first sample passes through unchanged with a zero derivative.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from stationcheck.core.validation import require_at_least, require_finite


@dataclass(frozen=True)
class OneEuroSettings:
    """``min_cutoff_hz`` trades jitter for lag when still; ``beta`` (1/px) lowers lag in motion."""

    min_cutoff_hz: float = 1.0
    beta: float = 0.05
    d_cutoff_hz: float = 1.0

    def __post_init__(self) -> None:
        for name in ("min_cutoff_hz", "d_cutoff_hz"):
            value = getattr(self, name)
            require_finite("OneEuroSettings", name, value)
            if value <= 0:
                raise ValueError(f"OneEuroSettings.{name} must be > 0, got {value}")
        require_at_least("OneEuroSettings", "beta", self.beta, 0.0)


@dataclass(frozen=True)
class OneEuroState:
    x_hat: float
    dx_hat: float
    t_s: float


def smoothing_factor(period_s: float, cutoff_hz: float) -> float:
    """alpha = 1 / (1 + tau / Te) with tau = 1 / (2 pi fc)."""
    tau_s = 1.0 / (2.0 * math.pi * cutoff_hz)
    return 1.0 / (1.0 + tau_s / period_s)


def one_euro_step(
    state: OneEuroState | None, x: float, t_s: float, settings: OneEuroSettings
) -> OneEuroState:
    """Filter one sample. A timestamp not after the previous one carries no new information and
    leaves the state as it was."""
    if state is None:
        return OneEuroState(x_hat=x, dx_hat=0.0, t_s=t_s)
    period_s = t_s - state.t_s
    if period_s <= 0.0:
        return state
    dx = (x - state.x_hat) / period_s
    alpha_d = smoothing_factor(period_s, settings.d_cutoff_hz)
    dx_hat = alpha_d * dx + (1.0 - alpha_d) * state.dx_hat
    cutoff_hz = settings.min_cutoff_hz + settings.beta * abs(dx_hat)
    alpha = smoothing_factor(period_s, cutoff_hz)
    x_hat = alpha * x + (1.0 - alpha) * state.x_hat
    return OneEuroState(x_hat=x_hat, dx_hat=dx_hat, t_s=t_s)


@dataclass(frozen=True)
class PointFilterState:
    """One filter per image axis, as the paper suggests for multi-dimensional signals."""

    x: OneEuroState
    y: OneEuroState

    @property
    def point_px(self) -> tuple[float, float]:
        return (self.x.x_hat, self.y.x_hat)


def filter_point(
    state: PointFilterState | None,
    point_px: tuple[float, float],
    t_s: float,
    settings: OneEuroSettings,
) -> PointFilterState:
    return PointFilterState(
        x=one_euro_step(state.x if state else None, point_px[0], t_s, settings),
        y=one_euro_step(state.y if state else None, point_px[1], t_s, settings),
    )
