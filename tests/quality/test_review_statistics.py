"""The review's statistics against outside references: scipy for Wilson intervals, the
NIST/SEMATECH e-Handbook of Statistical Methods worked examples for EWMA and CUSUM, and
constructed series with known answers for the Western Electric rules."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import binomtest

from stationcheck.quality.control_charts import (
    cusum_chart,
    ewma_chart,
    moving_range_sigma,
)
from stationcheck.quality.proportion import wilson_interval
from stationcheck.quality.run_rules import western_electric


def scipy_wilson(successes: int, trials: int, confidence: float) -> tuple[float, float]:
    """Reference: scipy.stats.binomtest(...).proportion_ci(method="wilson")."""
    ci = binomtest(successes, trials).proportion_ci(confidence_level=confidence, method="wilson")
    return float(ci.low), float(ci.high)


@pytest.mark.parametrize(
    ("successes", "trials", "confidence", "error"),
    [
        (0, 1, 0.95, None),
        (1, 1, 0.95, None),
        (3, 7, 0.95, None),
        (941, 1000, 0.95, None),
        (999_999, 1_000_000, 0.99, None),
        (12, 40, 0.90, None),
        (0, 0, 0.95, "trials >= 1"),
        (5, 4, 0.95, "successes <= trials"),
        (-1, 4, 0.95, "successes <= trials"),
        (2, 4, 1.0, "confidence"),
    ],
)
def test_wilson_interval_agrees_with_scipy(successes: int, trials: int, confidence: float,
                                           error: str | None) -> None:
    if error is not None:
        with pytest.raises(ValueError, match=error):
            wilson_interval(successes, trials, confidence)
        return
    got = wilson_interval(successes, trials, confidence)
    low, high = scipy_wilson(successes, trials, confidence)
    assert got.low == pytest.approx(low, abs=1e-12)
    assert got.high == pytest.approx(high, abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 2_000_000).flatmap(lambda n: st.tuples(st.integers(0, n), st.just(n))))
def test_wilson_interval_agrees_with_scipy_for_any_count(case: tuple[int, int]) -> None:
    successes, trials = case
    got = wilson_interval(successes, trials)
    low, high = scipy_wilson(successes, trials, 0.95)
    assert (got.low, got.high) == (pytest.approx(low, abs=1e-10), pytest.approx(high, abs=1e-10))
    assert got.low <= successes / trials <= got.high


# NIST/SEMATECH e-Handbook of Statistical Methods, section 6.3.2.4 "EWMA Control Charts"
# (https://www.itl.nist.gov/div898/handbook/pmc/section3/pmc324.htm), worked example: EWMA_0 = 50,
# s = 2.0539, lambda = 0.3, k = 3; the 20 data values and the EWMA column printed to 2 decimals
# (first entry EWMA_0); limits UCL = 52.5884, LCL = 47.4115 (the page computes with the rounded
# factor 0.4201); no value outside the limits. The page itself was not fetched here: the figures
# are as transcribed identically in several public test suites found by code search, and agree
# with our recollection of the page (from memory).
NIST_EWMA_DATA = [52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0, 50.1, 51.2, 50.5,
                  49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1]
NIST_EWMA_PRINTED = [50.00, 50.60, 49.52, 50.56, 50.18, 50.16, 49.21, 49.75, 49.85, 50.26, 50.33,
                     50.11, 49.36, 49.52, 50.05, 49.38, 49.92, 50.73, 51.23, 51.94, 51.99]


def test_ewma_reproduces_the_nist_handbook_example() -> None:
    chart = ewma_chart(NIST_EWMA_DATA, target=50.0, sigma=2.0539, weight=0.3, width=3.0,
                       limits="asymptotic")
    printed = NIST_EWMA_PRINTED[1:]
    assert [round(z, 2) for z in chart.statistics] == pytest.approx(printed, abs=0.0051)
    assert all(u == pytest.approx(52.5884, abs=1e-4) for u in chart.upper)
    assert all(lo == pytest.approx(47.4115, abs=2e-4) for lo in chart.lower)  # printed rounded down
    assert chart.signals == ()


def test_exact_ewma_limits_start_narrow_and_reach_the_asymptotic_ones() -> None:
    chart = ewma_chart(NIST_EWMA_DATA, target=50.0, sigma=2.0539, weight=0.3)
    # first limit: width * sigma * sqrt(lambda/(2-lambda) * (1-(1-lambda)^2)) = 3 s lambda
    assert chart.upper[0] - 50.0 == pytest.approx(3 * 2.0539 * 0.3)
    assert chart.upper[-1] == pytest.approx(52.5884, abs=1e-3)
    assert all(a <= b for a, b in zip(chart.upper, chart.upper[1:], strict=False))


# NIST/SEMATECH e-Handbook of Statistical Methods, section 6.3.2.3 "Cusum Control Charts"
# (https://www.itl.nist.gov/div898/handbook/pmc/section3/pmc323.htm), tabular example: target
# 325, k = 0.3175, h = 4.1959; S_hi and S_lo printed to 2 decimals; the first out-of-control
# value is group 14 (S_hi = 4.94 > h). Same provenance as above: transcriptions in public test
# suites, checked against each other; page not fetched here (from memory for the page layout).
NIST_CUSUM_DATA = [324.925, 324.675, 324.725, 324.350, 325.350, 325.225, 324.125, 324.525,
                   325.225, 324.600, 324.625, 325.150, 328.325, 327.250, 327.825, 328.500,
                   326.675, 327.775, 326.875, 328.350]
NIST_S_HI = [0.00, 0.00, 0.00, 0.00, 0.03, 0.00, 0.00, 0.00, 0.00, 0.00,
             0.00, 0.00, 3.01, 4.94, 7.45, 10.63, 11.99, 14.44, 16.00, 19.04]
NIST_S_LO = [0.00, 0.01, 0.00, 0.33, 0.00, 0.00, 0.56, 0.72, 0.17, 0.25,
             0.31, 0.00, 0.00, 0.00, 0.00, 0.00, 0.00, 0.00, 0.00, 0.00]


def test_cusum_reproduces_the_nist_handbook_example() -> None:
    chart = cusum_chart(NIST_CUSUM_DATA, target=325.0, k=0.3175, h=4.1959)
    # two printed S_hi values sit on rounding ties (14.445, 19.035): half a unit of the last place
    assert list(chart.upper_sums) == pytest.approx(NIST_S_HI, abs=0.0051)
    assert list(chart.lower_sums) == pytest.approx(NIST_S_LO, abs=0.0051)
    assert chart.first_signal == 13  # group 14
    assert chart.signals == tuple(range(13, 20))


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: ewma_chart([1.0], 0.0, 0.0), "sigma"),
        (lambda: ewma_chart([1.0], 0.0, 1.0, weight=0.0), "lambda"),
        (lambda: ewma_chart([math.nan], 0.0, 1.0), "finite"),
        (lambda: cusum_chart([1.0], 0.0, -1.0, 4.0), "k must"),
        (lambda: cusum_chart([1.0], 0.0, 0.5, 0.0), "h must"),
        (lambda: moving_range_sigma([1.0]), "at least 2"),
        (lambda: western_electric([1.0], 0.0, 0.0), "sigma"),
    ],
)
def test_chart_inputs_are_checked(call: object, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        call()  # type: ignore[operator]


def test_moving_range_sigma_of_a_known_series() -> None:
    # ranges 1, 2, 3 -> mean 2 -> sigma = 2 / (2 / sqrt(pi)) = sqrt(pi)
    assert moving_range_sigma([0.0, 1.0, -1.0, 2.0]) == pytest.approx(math.sqrt(math.pi))


# Western Electric rules on constructed series (centre 0, sigma 1): each row is a series and the
# (index, rule, side) hits it must give, no more, no fewer.
@pytest.mark.parametrize(
    ("series", "hits"),
    [
        ([0.5, -0.5] * 10, []),  # in control: alternating inside 1 sigma
        ([0.0, 3.5, 0.0, -3.2], [(1, 1, 1), (3, 1, -1)]),
        ([0.0, 3.0, 0.0], []),  # exactly 3 sigma is not beyond
        ([2.5, 0.0, 2.5], [(2, 2, 1)]),  # 2 of 3 beyond 2 sigma
        ([2.5, -2.5, 0.0], []),  # beyond 2 sigma, but on opposite sides
        ([2.5, -2.5, 2.5], [(2, 2, 1)]),  # the first and third count together
        ([2.5, 0.0, 0.0, 2.5], []),  # 2 beyond but not within 3
        ([-1.5, -1.5, 0.0, -1.5, -1.5], [(4, 3, -1)]),  # 4 of 5 beyond 1 sigma
        ([1.5, 1.5, 1.5, -0.5, 1.5], [(4, 3, 1)]),  # 4 of 5 need not be consecutive
        ([1.5, 1.5, 1.5, -0.5, 0.5], []),  # only 3 of 5 beyond 1 sigma
        ([0.2] * 7, []),  # 7 on one side is not yet a run
        ([0.2] * 8, [(7, 4, 1)]),
        ([0.2] * 4 + [0.0] + [0.2] * 4, []),  # a value on the centre line breaks the run
        ([-0.2] * 9, [(7, 4, -1), (8, 4, -1)]),
        ([2.5, 2.5, 3.5], [(1, 2, 1), (2, 1, 1), (2, 2, 1)]),
    ],
)
def test_western_electric_rules_on_constructed_series(
    series: list[float], hits: list[tuple[int, int, int]]
) -> None:
    got = [(h.index, h.rule, h.side) for h in western_electric(series, 0.0, 1.0)]
    assert got == hits


def test_western_electric_scales_by_centre_and_sigma() -> None:
    torque_nm = [10.0, 10.0, 10.0 + 3.5 * 0.2]
    (hit,) = western_electric(torque_nm, centre=10.0, sigma=0.2)
    assert (hit.index, hit.rule, hit.side) == (2, 1, 1)
    assert "beyond 3 sigma" in hit.text


def test_a_slow_drift_inside_the_tolerance_is_flagged() -> None:
    """A socket wearing: the torque creeps up 0.6 sigma over 60 values, far inside a +-5 sigma
    tolerance band; EWMA, CUSUM and the run rules all see it before any value is NOK."""
    import random

    rng = random.Random(3)
    base = [rng.gauss(10.0, 0.2) for _ in range(50)]
    drift = [rng.gauss(10.0 + 0.2 * 1.2 * i / 60, 0.2) for i in range(60)]
    sigma = moving_range_sigma(base)
    values = base + drift
    assert all(9.0 <= v <= 11.0 for v in values)
    ewma = ewma_chart(values, target=sum(base) / len(base), sigma=sigma)
    cusum = cusum_chart(values, target=sum(base) / len(base), k=sigma / 2, h=5 * sigma)
    assert [i for i in ewma.signals if i < 50] == []
    assert ewma.signals and ewma.signals[0] >= 50
    assert cusum.first_signal is not None and cusum.first_signal >= 50
    assert any(h.index >= 50 for h in western_electric(values, sum(base) / 50, sigma))
