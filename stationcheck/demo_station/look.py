"""How a station's camera picture can look worse than the sample video: the renderer's look knobs.

A :class:`Look` is applied to a developed camera frame in the order the physics happens: lens
blur, light level and colour cast with extra lens fall-off (vignette), sensor noise, then the
camera's JPEG encoder. Scene scripts name one under ``look:`` (see ``script.py``); the reference
frame is always rendered without it, as it was taken at setup in good light. Demo data only.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

import cv2
import numpy as np

from stationcheck.demo_station import textures
from stationcheck.demo_station.shading import as_u8

U8Image = np.ndarray


@dataclass(frozen=True)
class Look:
    """``gain``: light level (1 = as drawn); ``cast_bgr``: per-channel colour cast;
    ``vignette``: extra darkening towards the corners (share lost in a corner, 0-0.9);
    ``noise_sigma``: extra sensor noise (grey levels, one standard deviation);
    ``jpeg_quality``: the camera's JPEG quality (None: no compression); ``blur_px``: extra
    Gaussian lens blur (sigma, px); ``light_from``: where a lamp sits, as (x, y) fractions of
    the frame (may lie outside it), brightening the bench towards it by up to
    ``light_falloff`` (0-1; 0 = even light)."""

    gain: float = 1.0
    cast_bgr: tuple[float, float, float] = (1.0, 1.0, 1.0)
    vignette: float = 0.0
    noise_sigma: float = 0.0
    jpeg_quality: int | None = None
    blur_px: float = 0.0
    light_from: tuple[float, float] = (0.5, 0.5)
    light_falloff: float = 0.0

    def __post_init__(self) -> None:
        if len(self.light_from) != 2 or not all(-2.0 <= c <= 3.0 for c in self.light_from):
            raise ValueError(
                f"Look.light_from must be two fractions of the frame in [-2, 3], "
                f"got {self.light_from!r}"
            )
        if not 0.0 <= self.light_falloff <= 1.0:
            raise ValueError(f"Look.light_falloff must be in [0, 1], got {self.light_falloff!r}")
        if not 0.05 <= self.gain <= 4.0:
            raise ValueError(f"Look.gain must be in [0.05, 4], got {self.gain!r}")
        if len(self.cast_bgr) != 3 or not all(0.2 <= c <= 3.0 for c in self.cast_bgr):
            raise ValueError(
                f"Look.cast_bgr must be three factors in [0.2, 3], got {self.cast_bgr!r}"
            )
        if not 0.0 <= self.vignette <= 0.9:
            raise ValueError(f"Look.vignette must be in [0, 0.9], got {self.vignette!r}")
        if not 0.0 <= self.noise_sigma <= 40.0:
            raise ValueError(f"Look.noise_sigma must be in [0, 40], got {self.noise_sigma!r}")
        if self.jpeg_quality is not None and not 1 <= self.jpeg_quality <= 100:
            raise ValueError(f"Look.jpeg_quality must be in [1, 100], got {self.jpeg_quality!r}")
        if not 0.0 <= self.blur_px <= 10.0:
            raise ValueError(f"Look.blur_px must be in [0, 10], got {self.blur_px!r}")

    @property
    def is_plain(self) -> bool:
        return self == Look()

    def describe(self) -> str:
        parts = [f"light x{self.gain:g}"]
        if self.cast_bgr != (1.0, 1.0, 1.0):
            parts.append("cast " + "/".join(f"{c:g}" for c in self.cast_bgr))
        if self.vignette:
            parts.append(f"vignette {self.vignette:g}")
        parts.append(f"noise {self.noise_sigma:g}")
        parts.append("no JPEG" if self.jpeg_quality is None else f"JPEG {self.jpeg_quality}")
        if self.blur_px:
            parts.append(f"blur {self.blur_px:g}")
        if self.light_falloff:
            x, y = self.light_from
            parts.append(f"lamp at ({x:g}, {y:g}) falloff {self.light_falloff:g}")
        return ", ".join(parts)


WARM_CAST_BGR = (0.78, 0.95, 1.12)  # a warm lamp: less blue, more red


def look_from_mapping(doc: Any, where: str, errors: list[str]) -> Look:
    """A look from a script's ``look:`` mapping; problems go to ``errors`` with their place."""
    if doc is None:
        return Look()
    if not isinstance(doc, Mapping):
        errors.append(f"{where}: expected a mapping of look knobs")
        return Look()
    names = {f.name for f in fields(Look)}
    unknown = sorted(set(doc) - names)
    if unknown:
        errors.append(f"{where}: unknown keys {unknown}; knobs are {sorted(names)}")
        return Look()
    values = dict(doc)
    try:
        for key in ("cast_bgr", "light_from"):
            if key in values and isinstance(values[key], list):
                values[key] = tuple(float(c) for c in values[key])
        return Look(**values)
    except (TypeError, ValueError) as exc:
        errors.append(f"{where}: {exc}")
        return Look()


class LookFilter:
    """Applies one look to frames of one size; the light map and noise bank are made once."""

    def __init__(self, look: Look, width_px: int, height_px: int, seed: int) -> None:
        self.look = look
        light = textures.vignette(height_px, width_px, 2.0 * look.vignette)
        light = np.clip(light, 1.0 - look.vignette, 1.0) * np.float32(look.gain)
        if look.light_falloff:
            ys, xs = np.mgrid[0:height_px, 0:width_px].astype(np.float32)
            d = np.hypot(xs / width_px - look.light_from[0], ys / height_px - look.light_from[1])
            light = light * np.clip(1.0 + look.light_falloff * (0.5 - d), 0.05, None)
        cast = np.asarray(look.cast_bgr, np.float32)
        self._light = np.ascontiguousarray(light[:, :, None] * cast[None, None, :], np.float32)
        self._plain_light = (
            look.vignette == 0.0 and look.cast_bgr == (1.0, 1.0, 1.0) and not look.light_falloff
        )
        rng = np.random.default_rng(seed)
        self._noise = (
            textures.NoiseBank(rng, height_px, width_px, look.noise_sigma)
            if look.noise_sigma > 0
            else None
        )

    def apply(self, image: U8Image, rng: np.random.Generator) -> U8Image:
        """The frame as this camera would deliver it (uint8 BGR; the input is not modified)."""
        look = self.look
        out = image
        if look.blur_px > 0:
            out = as_u8(cv2.GaussianBlur(out, (0, 0), look.blur_px))
        if self._plain_light:
            if look.gain != 1.0:
                out = as_u8(cv2.convertScaleAbs(out, alpha=look.gain))
        else:
            out = as_u8(cv2.multiply(out, self._light, dtype=cv2.CV_8U))
        if self._noise is not None:
            out = self._noise.apply(out, rng)
        if look.jpeg_quality is not None:
            ok, data = cv2.imencode(".jpg", out, [cv2.IMWRITE_JPEG_QUALITY, look.jpeg_quality])
            if not ok:
                raise ValueError("JPEG encoding failed")
            out = as_u8(cv2.imdecode(data, cv2.IMREAD_COLOR))
        return out
