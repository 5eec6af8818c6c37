"""The renderer's look knobs: what each does to a frame, measured independently, and the
scene script's ``look:`` block."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import cv2
import numpy as np
import pytest

from stationcheck.demo_station.look import WARM_CAST_BGR, Look, LookFilter
from stationcheck.demo_station.script import Limits, parse_script
from stationcheck.errors import ConfigError

LIMITS = Limits((4.5, 5.5), (15.0, 45.0), tuple(f"screw_{i}" for i in range(1, 7)))
ScriptDoc = Callable[..., dict[str, Any]]


def _scene() -> np.ndarray:
    ys, xs = np.mgrid[0:240, 0:320]
    base = 90 + 60 * ((xs // 16 + ys // 16) % 2)  # a chequer: edges for blur, flat for noise
    return np.dstack([base, base, base]).astype(np.uint8)


def _apply(look: Look, image: np.ndarray | None = None) -> np.ndarray:
    image = _scene() if image is None else image
    return LookFilter(look, image.shape[1], image.shape[0], 1).apply(
        image, np.random.default_rng(0))


def test_the_plain_look_changes_nothing() -> None:
    assert Look().is_plain
    assert np.array_equal(_apply(Look()), _scene())


def test_gain_and_cast_scale_each_channel() -> None:
    out = _apply(Look(gain=0.5, cast_bgr=WARM_CAST_BGR)).astype(np.float64)
    scene = _scene().astype(np.float64)
    for channel, cast in enumerate(WARM_CAST_BGR):
        ratio = out[..., channel].mean() / scene[..., channel].mean()  # numpy means
        assert ratio == pytest.approx(0.5 * cast, abs=0.01)


def test_vignette_darkens_the_corners_not_the_centre() -> None:
    flat = np.full((240, 320, 3), 200, np.uint8)
    out = _apply(Look(vignette=0.4), flat)
    assert out[120, 160, 1] == pytest.approx(200, abs=2)
    assert out[0, 0, 1] == pytest.approx(200 * 0.6, abs=3)


def test_sensor_noise_has_the_sigma_asked_for() -> None:
    flat = np.full((240, 320, 3), 128, np.uint8)
    out = _apply(Look(noise_sigma=6.0), flat).astype(np.float64)
    # luminance noise plus weaker chroma noise per channel: about sqrt(1 + 0.45^2) x sigma
    assert float(out[..., 1].std()) == pytest.approx(6.0 * np.hypot(1.0, 0.45), rel=0.15)


def test_jpeg_quality_is_opencvs_encoder_and_blur_is_a_gaussian() -> None:
    scene = _scene()
    out = _apply(Look(jpeg_quality=15, blur_px=1.2))
    blurred = cv2.GaussianBlur(scene, (0, 0), 1.2)
    ok, data = cv2.imencode(".jpg", blurred, [cv2.IMWRITE_JPEG_QUALITY, 15])
    assert ok
    assert np.array_equal(out, cv2.imdecode(data, cv2.IMREAD_COLOR))


@pytest.mark.parametrize(("knobs", "message"), [
    ({"gain": 9.0}, "Look.gain"),
    ({"jpeg_quality": 0}, "Look.jpeg_quality"),
    ({"fog": 1}, "unknown keys ['fog']"),
])
def test_a_bad_look_is_reported_with_its_place(script_doc: ScriptDoc, knobs: dict[str, Any],
                                               message: str) -> None:
    doc = {**script_doc(), "look": knobs}
    with pytest.raises(ConfigError, match=r"look: .*" + message.replace("[", r"\[")):
        parse_script(doc, LIMITS)


def test_a_script_names_its_look(script_doc: ScriptDoc) -> None:
    doc = {**script_doc(), "look": {"gain": 0.45, "cast_bgr": list(WARM_CAST_BGR),
                                    "vignette": 0.35, "noise_sigma": 3, "jpeg_quality": 40}}
    look = parse_script(doc, LIMITS).look
    assert look == Look(0.45, WARM_CAST_BGR, 0.35, 3, 40)
    assert "JPEG 40" in look.describe() and parse_script(script_doc(), LIMITS).look.is_plain
