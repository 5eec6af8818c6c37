"""The One Euro filter against the paper's equations and against the authors' PyPI package.

Source: G. Casiez, N. Roussel, D. Vogel, "1 Euro Filter: A Simple Speed-based Low-pass Filter for
Noisy Input in Interactive Systems", CHI 2012. alpha = 1 / (1 + tau / Te), tau = 1 / (2 pi fc),
fc = mincutoff + beta * |dx_hat|, derivative dx = (x - x_hat_prev) / Te filtered at dcutoff.
Reference implementation: the ``OneEuroFilter`` package (0.2.1, by the paper's authors).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from OneEuroFilter import OneEuroFilter

from stationcheck.core.filters import (
    OneEuroSettings,
    OneEuroState,
    filter_point,
    one_euro_step,
    smoothing_factor,
)


def test_smoothing_factor_is_the_papers_alpha() -> None:
    # Te = 0.1 s, fc = 1 Hz: tau = 1 / (2 pi) = 0.1591549 s, alpha = 1 / (1 + 1.591549) = 0.3858695
    assert smoothing_factor(0.1, 1.0) == pytest.approx(0.3858695, abs=1e-7)
    # a very high cutoff lets the sample through; a very low one holds the old value
    assert smoothing_factor(0.1, 1e9) == pytest.approx(1.0, abs=1e-6)
    assert smoothing_factor(0.1, 1e-9) == pytest.approx(0.0, abs=1e-6)


def test_hand_computed_case_from_the_papers_equations() -> None:
    """Samples x = 0, 1, 1.5 at Te = 0.1 s; mincutoff 1 Hz, beta 0.1, dcutoff 1 Hz.

    alpha_d = 0.3858695 (see above) for every step.
    t=0.1: dx = (1 - 0)/0.1 = 10; dx_hat = 0.3858695 * 10 = 3.858695; fc = 1 + 0.1 * 3.858695
           = 1.3858695 Hz; tau = 0.1148422; alpha = 1/(1 + 1.148422) = 0.465460; x_hat = 0.465460.
    t=0.2: dx = (1.5 - 0.465460)/0.1 = 10.34540; dx_hat = 0.3858695 * 10.34540
           + 0.6141305 * 3.858695 = 6.361717; fc = 1.6361717 Hz; alpha = 0.506912;
           x_hat = 0.506912 * 1.5 + 0.493088 * 0.465460 = 0.989881.
    """
    params = OneEuroSettings(min_cutoff_hz=1.0, beta=0.1, d_cutoff_hz=1.0)
    first = one_euro_step(None, 0.0, 0.0, params)
    assert first == OneEuroState(x_hat=0.0, dx_hat=0.0, t_s=0.0)
    second = one_euro_step(first, 1.0, 0.1, params)
    assert second.dx_hat == pytest.approx(3.858695, abs=1e-6)
    assert second.x_hat == pytest.approx(0.465460, abs=1e-6)
    third = one_euro_step(second, 1.5, 0.2, params)
    assert third.dx_hat == pytest.approx(6.361717, abs=1e-6)
    assert third.x_hat == pytest.approx(0.989881, abs=1e-6)


def test_a_repeated_timestamp_leaves_the_state_alone() -> None:
    params = OneEuroSettings()
    state = one_euro_step(one_euro_step(None, 0.0, 1.0, params), 2.0, 1.1, params)
    assert one_euro_step(state, 50.0, 1.1, params) is state
    assert one_euro_step(state, 50.0, 1.0, params) is state


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"min_cutoff_hz": 0.0}, "min_cutoff_hz must be > 0, got 0.0"),
        ({"d_cutoff_hz": -1.0}, "d_cutoff_hz must be > 0, got -1.0"),
        ({"beta": -0.1}, "beta must be >= 0.0, got -0.1"),
        ({"min_cutoff_hz": math.nan}, "must be a finite number"),
    ],
)
def test_settings_are_validated(kwargs: dict[str, float], message: str) -> None:
    with pytest.raises(ValueError, match=message):
        OneEuroSettings(**kwargs)


signals = st.lists(
    st.tuples(
        st.floats(min_value=0.004, max_value=0.2),  # sampling period, s (jittery frame times)
        st.floats(min_value=-500.0, max_value=500.0),  # value, px
    ),
    min_size=2,
    max_size=60,
)


@settings(max_examples=150, deadline=None)
@given(
    samples=signals,
    min_cutoff_hz=st.floats(min_value=0.05, max_value=10.0),
    beta=st.floats(min_value=0.0, max_value=2.0),
    d_cutoff_hz=st.floats(min_value=0.1, max_value=10.0),
)
def test_matches_the_authors_reference_package_on_random_signals(
    samples: list[tuple[float, float]], min_cutoff_hz: float, beta: float, d_cutoff_hz: float
) -> None:
    params = OneEuroSettings(min_cutoff_hz=min_cutoff_hz, beta=beta, d_cutoff_hz=d_cutoff_hz)
    # the package skips its rate update when the previous timestamp is 0 (falsy): start at 1 s
    reference = OneEuroFilter(freq=30.0, mincutoff=min_cutoff_hz, beta=beta, dcutoff=d_cutoff_hz)
    state: OneEuroState | None = None
    t_s = 1.0
    for period_s, value in samples:
        t_s += period_s
        state = one_euro_step(state, value, t_s, params)
        expected = reference(value, t_s)
        assert state.x_hat == pytest.approx(expected, rel=1e-9, abs=1e-9)


def test_point_filter_runs_one_filter_per_axis() -> None:
    params = OneEuroSettings(min_cutoff_hz=1.0, beta=0.1)
    state = filter_point(None, (0.0, 10.0), 0.0, params)
    state = filter_point(state, (1.0, 10.0), 0.1, params)
    assert state.point_px == pytest.approx((0.465460, 10.0), abs=1e-6)
