"""Minimum-jerk reaches (Flash & Hogan, J. Neurosci. 1985: x(u) = 10u^3 - 15u^4 + 6u^5)."""

from __future__ import annotations

import numpy as np
import pytest

from stationcheck.demo_station.motion import Track, Waypoint, minimum_jerk


@pytest.mark.parametrize(
    ("u", "expected"),
    [(0.0, 0.0), (0.5, 0.5), (1.0, 1.0), (0.25, 0.103515625), (-1.0, 0.0), (2.0, 1.0)],
)
def test_minimum_jerk_profile(u: float, expected: float) -> None:
    assert minimum_jerk(u) == pytest.approx(expected)


def test_minimum_jerk_starts_and_ends_at_rest() -> None:
    u = np.linspace(0.0, 1.0, 2001)
    x = np.asarray([minimum_jerk(v) for v in u])
    v = np.gradient(x, u)
    assert abs(v[0]) < 1e-3 and abs(v[-1]) < 1e-3
    assert v.max() == pytest.approx(1.875, rel=1e-3)  # peak speed 15/8 of the mean
    assert np.all(np.diff(x) >= 0)


def test_a_reach_overshoots_a_little_and_settles_on_target() -> None:
    track = Track(Waypoint((0.0, 0.0)), 30.0, seed=1)
    end = track.move(Waypoint((100.0, 0.0)), 0.6)
    track.hold(0.5)
    xs = [track.sample(f).tip_px[0] for f in range(end + 10)]
    assert max(xs) > 101.0  # overshoot ...
    assert max(xs) < 106.0  # ... of a few pixels
    assert abs(track.sample(end + 5).tip_px[0] - 100.0) < 1.0
