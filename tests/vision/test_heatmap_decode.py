"""Sub-pixel decoding on synthetic Gaussian heatmaps with known centres.

Reference: DARK (Zhang et al., CVPR 2020) shows the Newton step on the log-heatmap recovers the
centre of a Gaussian heatmap exactly; argmax is off by up to half a cell.
"""

from __future__ import annotations

import numpy as np
import pytest

from stationcheck.vision.heatmap_decode import (
    cell_to_input_px,
    decode_peaks,
    input_px_to_cell,
    log_sigmoid,
    refine_offset,
)


def gaussian_logits(
    cx: float,
    cy: float,
    h: int = 24,
    w: int = 32,
    sigma_x: float = 1.25,
    sigma_y: float | None = None,
    rho: float = 0.0,
    peak: float = 0.97,
) -> np.ndarray:
    """Logits whose sigmoid is a (possibly rotated) Gaussian bump with the given centre."""
    sy = sigma_x if sigma_y is None else sigma_y
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float64)
    dx, dy = (xx - cx) / sigma_x, (yy - cy) / sy
    q = (dx**2 - 2 * rho * dx * dy + dy**2) / (1 - rho**2)
    g = peak * np.exp(-q / 2)
    g = np.clip(g, 1e-12, None)
    return np.log(g) - np.log1p(-g)


@pytest.mark.parametrize(
    ("cx", "cy", "sigma_x", "sigma_y", "rho"),
    [
        (10.0, 7.0, 1.25, None, 0.0),  # on a cell centre
        (10.37, 7.81, 1.25, None, 0.0),
        (3.49, 20.51, 1.0, None, 0.0),  # almost halfway between cells
        (25.2, 5.6, 2.0, 1.5, 0.0),  # anisotropic
        (15.73, 11.12, 1.6, 1.1, 0.45),  # rotated
        (1.3, 1.7, 1.25, None, 0.0),  # near the corner
    ],
)
def test_decoder_recovers_known_centre(
    cx: float, cy: float, sigma_x: float, sigma_y: float | None, rho: float
) -> None:
    logits = gaussian_logits(cx, cy, sigma_x=sigma_x, sigma_y=sigma_y, rho=rho)
    (peak,) = decode_peaks(logits[None])
    assert abs(peak.x_cell - cx) < 0.01 and abs(peak.y_cell - cy) < 0.01
    argmax_row, argmax_col = np.unravel_index(np.argmax(logits), logits.shape)
    assert (peak.x_cell, peak.y_cell) != (argmax_col, argmax_row) or (cx, cy) == (10.0, 7.0)


def test_decoder_error_stays_below_a_tenth_of_a_cell_with_noise() -> None:
    rng = np.random.default_rng(7)
    errors, argmax_errors = [], []
    for _ in range(200):
        cx, cy = rng.uniform(3, 28), rng.uniform(3, 20)
        logits = gaussian_logits(cx, cy) + rng.normal(0, 0.02, (24, 32))
        (peak,) = decode_peaks(logits[None])
        errors.append(np.hypot(peak.x_cell - cx, peak.y_cell - cy))
        r, c = np.unravel_index(np.argmax(logits), logits.shape)
        argmax_errors.append(np.hypot(c - cx, r - cy))
    assert np.max(errors) < 0.1
    assert np.median(errors) < 0.25 * np.median(argmax_errors)


def test_each_channel_is_decoded_independently() -> None:
    logits = np.stack([gaussian_logits(5.3, 4.2), gaussian_logits(20.6, 15.4)])
    tip, rear = decode_peaks(logits)
    assert (round(tip.x_cell, 2), round(tip.y_cell, 2)) == (5.3, 4.2)
    assert (round(rear.x_cell, 2), round(rear.y_cell, 2)) == (20.6, 15.4)
    assert tip.peak_logit == pytest.approx(float(logits[0].max()))


@pytest.mark.parametrize(
    ("logit_map", "row", "col", "expected"),
    [
        (np.zeros((5, 5)), 2, 2, (0.0, 0.0)),  # flat: no direction, no offset
        (np.array([[0.0, 1.0, 0.0]]), 0, 1, (0.0, 0.0)),  # single row: symmetric in x
        (np.array([[3.0, 2.0, 0.0]]), 0, 0, (0.0, 0.0)),  # peak on the border: no offset
    ],
)
def test_degenerate_peaks_fall_back_safely(
    logit_map: np.ndarray, row: int, col: int, expected: tuple[float, float]
) -> None:
    assert refine_offset(logit_map, row, col) == pytest.approx(expected)


def test_saddle_falls_back_to_the_axis_that_curves_down() -> None:
    # Curves down along x (peak at x = 2.25), curves up along y: only x moves.
    yy, xx = np.mgrid[0:5, 0:5].astype(np.float64)
    saddle = -((xx - 2.25) ** 2) + 0.5 * (yy - 2) ** 2
    dx, dy = refine_offset(saddle - 40, 2, 2)  # very negative logits: log_sigmoid ~ identity
    assert dx == pytest.approx(0.25, abs=1e-6) and dy == 0.0


def test_offset_is_clipped_to_one_cell() -> None:
    ramp = np.array([[0.0, 10.0, 10.001]]) * np.ones((3, 1))
    dx, _ = refine_offset(ramp, 1, 1)
    assert -1.0 <= dx <= 1.0


def test_log_sigmoid_is_stable_for_large_logits() -> None:
    values = log_sigmoid(np.array([-800.0, 0.0, 800.0]))
    assert np.isfinite(values).all()
    assert values == pytest.approx([-800.0, -np.log(2.0), 0.0])


@pytest.mark.parametrize("stride", [1, 2, 4, 8])
def test_cell_and_input_pixel_mapping_round_trips(stride: int) -> None:
    # Cell j of an average pool with kernel = stride covers input pixels j*s .. j*s+s-1.
    assert cell_to_input_px(0.0, stride) == pytest.approx((stride - 1) / 2)
    assert input_px_to_cell(cell_to_input_px(3.3, stride), stride) == pytest.approx(3.3)
