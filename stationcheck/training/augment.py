"""Frame-level augmentation for keypoint training: geometry, lighting, blur, noise, video
compression and partial occlusion. Keypoints are ``K x 3`` rows of (x_px, y_px, v) with COCO
visibility v (0 not labelled/outside, 1 labelled but hidden, 2 visible).

Everything is drawn from the caller's ``numpy.random.Generator`` so a seed reproduces a batch.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

ImageU8 = npt.NDArray[np.uint8]
FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class AugmentSettings:
    """Probabilities and ranges; the defaults are what the bundled model was trained with."""

    p_affine: float = 0.7
    scale_range: tuple[float, float] = (0.85, 1.2)
    rotation_deg: float = 12.0
    shift_px: float = 24.0
    p_blur: float = 0.2
    p_motion_blur: float = 0.3
    motion_blur_px: tuple[float, float] = (4.0, 34.0)
    p_noise: float = 0.7
    noise_sigma_max: float = 7.0
    p_compress: float = 0.6
    jpeg_quality_range: tuple[int, int] = (25, 90)
    p_occlusion: float = 0.3


def _u8(image: object) -> ImageU8:
    """OpenCV's results typed as the uint8 images they are (no copy)."""
    return np.asarray(image, dtype=np.uint8)


class NoiseBank:
    """Pre-made sensor noise: a random window per frame costs a copy, not a fresh draw."""

    def __init__(self, rng: np.random.Generator, size_px: int = 1024) -> None:
        noise = rng.normal(128.0, 32.0, size=(size_px, size_px, 3))
        self._bank = np.clip(noise, 0, 255).astype(np.uint8)

    def window(self, rng: np.random.Generator, h: int, w: int) -> ImageU8:
        bh, bw = self._bank.shape[:2]
        if h > bh or w > bw:
            reps = (h // bh + 1, w // bw + 1, 1)
            return np.tile(self._bank, reps)[:h, :w]
        y = int(rng.integers(0, bh - h + 1))
        x = int(rng.integers(0, bw - w + 1))
        return self._bank[y : y + h, x : x + w]


def augment_frame(
    rng: np.random.Generator,
    image: ImageU8,
    keypoints: FloatArray,
    noise: NoiseBank,
    settings: AugmentSettings = AugmentSettings(),
    background: ImageU8 | None = None,
) -> tuple[ImageU8, FloatArray]:
    """One randomly augmented copy of a labelled frame. With ``background`` (the same view
    without the tool), motion blur smears the tool alone over the still bench
    (:func:`smear_foreground`, first, as the camera would); without it, a window around the
    tool (:func:`motion_blur_tool`)."""
    kps = np.array(keypoints, dtype=np.float64, copy=True)
    out = image
    if (
        background is not None
        and rng.random() < settings.p_motion_blur
        and background.shape == image.shape
    ):
        out = smear_foreground(rng, out, kps, background, settings)
    if rng.random() < settings.p_affine:
        out, kps = random_affine(rng, out, kps, settings)
    if rng.random() < settings.p_occlusion:
        out, kps = occlude(rng, out, kps)
    out = adjust_lighting(rng, out)
    if background is None and rng.random() < settings.p_motion_blur:
        out = motion_blur_tool(rng, out, kps, settings)
    if rng.random() < settings.p_blur:
        out = blur(rng, out)
    if rng.random() < settings.p_noise:
        sigma = rng.uniform(1.0, settings.noise_sigma_max)
        window = noise.window(rng, out.shape[0], out.shape[1])
        out = _u8(cv2.addWeighted(out, 1.0, window, sigma / 32.0, -128.0 * sigma / 32.0))
    if rng.random() < settings.p_compress:
        quality = int(rng.integers(settings.jpeg_quality_range[0], settings.jpeg_quality_range[1]))
        ok, data = cv2.imencode(".jpg", out, [cv2.IMWRITE_JPEG_QUALITY, quality])
        if ok:
            out = _u8(cv2.imdecode(data, cv2.IMREAD_COLOR))
    return np.ascontiguousarray(out), kps


def random_affine(
    rng: np.random.Generator, image: ImageU8, kps: FloatArray, settings: AugmentSettings
) -> tuple[ImageU8, FloatArray]:
    h, w = image.shape[:2]
    scale = rng.uniform(*settings.scale_range)
    angle = rng.uniform(-settings.rotation_deg, settings.rotation_deg)
    centre = (rng.uniform(0.3 * w, 0.7 * w), rng.uniform(0.3 * h, 0.7 * h))
    matrix = np.asarray(cv2.getRotationMatrix2D(centre, angle, scale), dtype=np.float64)
    matrix[:, 2] += rng.uniform(-settings.shift_px, settings.shift_px, size=2)
    out = _u8(
        cv2.warpAffine(
            image, matrix, (w, h), flags=cv2.INTER_LINEAR, borderMode=cv2.BORDER_REFLECT_101
        )
    )
    labelled = kps[:, 2] > 0
    xy = kps[:, :2] @ matrix[:, :2].T + matrix[:, 2]
    kps[:, :2] = np.where(labelled[:, None], xy, kps[:, :2])
    inside = (xy[:, 0] >= 0) & (xy[:, 0] <= w - 1) & (xy[:, 1] >= 0) & (xy[:, 1] <= h - 1)
    kps[labelled & ~inside, 2] = 0
    return out, kps


def adjust_lighting(rng: np.random.Generator, image: ImageU8) -> ImageU8:
    """Per-channel gain, contrast, gamma and brightness in one lookup table."""
    levels = np.arange(256, dtype=np.float64) / 255.0
    gamma = rng.uniform(0.7, 1.4)
    contrast = rng.uniform(0.65, 1.35)
    brightness = rng.uniform(-0.15, 0.15)
    lut = np.empty((1, 256, 3), np.uint8)
    for c in range(3):
        gain = rng.uniform(0.88, 1.12)
        v = (levels**gamma - 0.5) * contrast + 0.5 + brightness
        lut[0, :, c] = np.clip(v * gain * 255.0, 0, 255).astype(np.uint8)
    return _u8(cv2.LUT(image, lut))


def blur(rng: np.random.Generator, image: ImageU8) -> ImageU8:
    return _u8(cv2.GaussianBlur(image, (0, 0), rng.uniform(0.5, 1.4)))


def trailing_kernel(length_px: float, angle_rad: float) -> npt.NDArray[np.float32]:
    """A correlation kernel that smears each feature *behind* its position along the motion
    direction (uniform weights from the anchor back ``length_px``), so the sharp label stays at
    the leading end of the streak, where the object is at the end of the exposure."""
    half = int(np.ceil(length_px)) + 1
    kernel = np.zeros((2 * half + 1, 2 * half + 1), np.float32)
    end = (half + length_px * np.cos(angle_rad), half + length_px * np.sin(angle_rad))
    cv2.line(kernel, (half, half), (round(end[0]), round(end[1])), 1.0, 1, cv2.LINE_AA)
    return kernel / max(float(kernel.sum()), 1e-6)


def _kernel_window(
    mask: npt.NDArray[np.float32], kernel: npt.NDArray[np.float32]
) -> tuple[int, int, int, int] | None:
    """(top, bottom, left, right) of where ``mask`` is above 0, grown by the kernel's reach, so
    a filter on that window sees inside it the same pixels as a whole-frame filter would; None
    for an empty mask. Only there is the smear used, so only there is it computed."""
    rows, cols = np.nonzero(mask > 0.0)
    if len(rows) == 0:
        return None
    reach = kernel.shape[0] // 2 + 1
    height, width = mask.shape[:2]
    return (
        max(0, int(rows.min()) - reach),
        min(height, int(rows.max()) + 1 + reach),
        max(0, int(cols.min()) - reach),
        min(width, int(cols.max()) + 1 + reach),
    )


def motion_blur_tool(
    rng: np.random.Generator, image: ImageU8, kps: FloatArray, settings: AugmentSettings
) -> ImageU8:
    """Motion blur on the tool and its surroundings only (the bench stays sharp), trailing
    behind a random motion direction as a moving object's streak does."""
    labelled = kps[kps[:, 2] > 0, :2]
    if len(labelled) == 0:
        return image
    length = rng.uniform(*settings.motion_blur_px)
    kernel = trailing_kernel(length, rng.uniform(0, 2 * np.pi))
    mask = np.zeros(image.shape[:2], np.float32)
    points = [tuple(int(v) for v in p) for p in labelled]
    width = int(40 + 2 * length)
    cv2.line(mask, points[0], points[-1], 1.0, width)
    cv2.circle(mask, points[0], width // 2, 1.0, -1)
    soft = np.asarray(cv2.GaussianBlur(mask, (0, 0), 8.0), dtype=np.float32)
    reached = _kernel_window(soft, kernel)
    if reached is None:
        return image
    top, bottom, left, right = reached
    window = image[top:bottom, left:right]
    smeared = cv2.filter2D(window, cv2.CV_32F, kernel, borderType=cv2.BORDER_REFLECT_101)
    weight = soft[top:bottom, left:right, None]
    out = image.astype(np.float32)
    out[top:bottom, left:right] = window * (1.0 - weight) + np.rint(smeared) * weight
    return _u8(np.clip(out + 0.5, 0, 255))


FOREGROUND_DIFFERENCE = 24  # grey levels off the empty picture that count as the tool or hand


def foreground_mask(
    image: ImageU8, kps: FloatArray, background: ImageU8
) -> npt.NDArray[np.float32]:
    """Where ``image`` shows something in front of the empty ``background`` (the tool, the
    glove), near the tool: within a band around the tip-rear axis as wide as a fifth of the
    tool's length (at least 8 px either side). Soft-edged, 0..1."""
    labelled = kps[kps[:, 2] > 0, :2]
    height, width = image.shape[:2]
    band = np.zeros((height, width), np.uint8)
    if len(labelled) == 0:
        return band.astype(np.float32)
    points = [(round(float(p[0])), round(float(p[1]))) for p in labelled]
    length = float(np.hypot(*(labelled[-1] - labelled[0]))) if len(labelled) > 1 else 0.0
    half = int(8 + 0.2 * length)
    cv2.line(band, points[0], points[-1], 1, 2 * half + 1)
    cv2.circle(band, points[0], half, 1, -1)
    difference = cv2.absdiff(image, background).max(axis=2)
    moving = (difference > FOREGROUND_DIFFERENCE).astype(np.uint8) & band
    kernel = np.ones((3, 3), np.uint8)
    moving = cv2.dilate(cv2.morphologyEx(moving, cv2.MORPH_OPEN, kernel), kernel)
    return np.asarray(cv2.GaussianBlur(moving.astype(np.float32), (0, 0), 1.0), np.float32)


def smear_foreground(
    rng: np.random.Generator,
    image: ImageU8,
    kps: FloatArray,
    background: ImageU8,
    settings: AugmentSettings,
) -> ImageU8:
    """Motion blur as a camera records a moving tool in front of a still bench: the tool and
    glove (what differs from ``background``, the same view without them, near the tool) are
    averaged over the exposure along a random motion direction, ending where they are in
    ``image`` (so the sharp label stays at the streak's leading end); the bench behind stays
    sharp and shows through where the tool was for part of the exposure. ``image`` is the
    layer ``F`` over the bench ``B`` with coverage ``m``; over the exposure this is
    ``B * (1 - S(m)) + S(F * m)``, ``S`` the mean along the path."""
    mask = foreground_mask(image, kps, background)
    if not mask.any():
        return image
    length = rng.uniform(*settings.motion_blur_px)
    kernel = trailing_kernel(length, rng.uniform(0, 2 * np.pi))
    reached = _kernel_window(mask, kernel)
    if reached is None:  # (the mask is not empty: for the type checker)
        return image
    top, bottom, left, right = reached
    frame = image[top:bottom, left:right].astype(np.float32)
    bench = background[top:bottom, left:right].astype(np.float32)
    cover = mask[top:bottom, left:right, None]
    behind = frame * (1.0 - cover) + bench * cover  # the bench where the tool is now
    smeared_cover = cv2.filter2D(cover[..., 0], -1, kernel, borderType=cv2.BORDER_CONSTANT)
    smeared_tool = cv2.filter2D(frame * cover, -1, kernel, borderType=cv2.BORDER_CONSTANT)
    out = image.copy()
    window = behind * (1.0 - smeared_cover[..., None]) + smeared_tool
    out[top:bottom, left:right] = _u8(np.clip(window + 0.5, 0, 255))
    return out


def occlude(
    rng: np.random.Generator, image: ImageU8, kps: FloatArray
) -> tuple[ImageU8, FloatArray]:
    """Paints a hand-like blob over part of the tool (mostly the rear half); a tip it covers
    keeps its label with v=1 (labelled but hidden), as COCO does."""
    out = image.copy()
    h, w = out.shape[:2]
    labelled = kps[:, 2] > 0
    if labelled.all():
        t = rng.uniform(0.35, 1.1)  # along the tool from tip (0) to rear (1)
        cx, cy = kps[0, :2] + t * (kps[1, :2] - kps[0, :2])
    else:
        cx, cy = rng.uniform(0, w), rng.uniform(0, h)
    axes = (int(rng.uniform(12, 40)), int(rng.uniform(10, 28)))
    skin = np.array([rng.uniform(90, 170), rng.uniform(110, 190), rng.uniform(150, 230)])
    colour = tuple(float(c) for c in skin * rng.uniform(0.7, 1.05))
    angle_deg = rng.uniform(0, 180)
    cv2.ellipse(out, (int(cx), int(cy)), axes, angle_deg, 0, 360, colour, -1, cv2.LINE_AA)
    mask = np.zeros((h, w), np.uint8)
    cv2.ellipse(mask, (int(cx), int(cy)), axes, angle_deg, 0, 360, 255, -1)
    for i in np.flatnonzero(kps[:, 2] == 2):
        x, y = round(kps[i, 0]), round(kps[i, 1])
        if 0 <= x < w and 0 <= y < h and mask[y, x]:
            kps[i, 2] = 1
    return out, kps
