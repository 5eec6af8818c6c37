"""Symbols that double each colour meaning, and outlined text that reads on any background."""

from __future__ import annotations

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.overlay.palette import BGR, COLOURS, DARK
from stationcheck.overlay.station_view import Meaning

Image = npt.NDArray[np.uint8]
FONT = cv2.FONT_HERSHEY_SIMPLEX
FONT_BOLD = cv2.FONT_HERSHEY_DUPLEX


def point(x: float, y: float) -> tuple[int, int]:
    return (round(x), round(y))


def draw_symbol(
    image: Image,
    meaning: Meaning,
    centre: tuple[float, float],
    size_px: float,
    colour: BGR | None = None,
    ink: BGR = (255, 255, 255),
) -> None:
    """The meaning's symbol, ``size_px`` across, in its colour (or ``colour``) on a dark rim;
    ``ink`` is the colour of the cross inside the fault symbol."""
    c = colour if colour is not None else COLOURS[meaning]
    x, y = centre
    r = size_px / 2.0
    thick = max(2, int(size_px / 7))
    if meaning == "normal":  # check mark
        pts = np.array(
            [
                point(x - 0.8 * r, y),
                point(x - 0.2 * r, y + 0.6 * r),
                point(x + 0.85 * r, y - 0.65 * r),
            ],
            np.int32,
        )
        cv2.polylines(image, [pts], False, DARK, thick + 3, cv2.LINE_AA)
        cv2.polylines(image, [pts], False, c, thick, cv2.LINE_AA)
    elif meaning == "abnormal":  # triangle with "!"
        pts = np.array(
            [point(x, y - r), point(x + r, y + 0.8 * r), point(x - r, y + 0.8 * r)], np.int32
        )
        cv2.fillPoly(image, [pts], c, cv2.LINE_AA)
        cv2.polylines(image, [pts], True, DARK, 1, cv2.LINE_AA)
        cv2.line(image, point(x, y - 0.45 * r), point(x, y + 0.25 * r), DARK, thick, cv2.LINE_AA)
        cv2.circle(image, point(x, y + 0.55 * r), max(1, thick // 2 + 1), DARK, -1, cv2.LINE_AA)
    elif meaning == "fault":  # cross in a circle
        cv2.circle(image, point(x, y), int(r), c, -1, cv2.LINE_AA)
        cv2.circle(image, point(x, y), int(r), DARK, 1, cv2.LINE_AA)
        d = 0.45 * r
        for a, b in (((x - d, y - d), (x + d, y + d)), ((x - d, y + d), (x + d, y - d))):
            cv2.line(image, point(*a), point(*b), ink, thick, cv2.LINE_AA)
    elif meaning == "action":  # arrow pointing right
        pts = np.array(
            [
                point(x - r, y - 0.3 * r),
                point(x, y - 0.3 * r),
                point(x, y - 0.8 * r),
                point(x + r, y),
                point(x, y + 0.8 * r),
                point(x, y + 0.3 * r),
                point(x - r, y + 0.3 * r),
            ],
            np.int32,
        )
        cv2.fillPoly(image, [pts], c, cv2.LINE_AA)
        cv2.polylines(image, [pts], True, DARK, 1, cv2.LINE_AA)
    else:  # neutral: plain ring
        cv2.circle(image, point(x, y), int(r * 0.8), DARK, thick + 2, cv2.LINE_AA)
        cv2.circle(image, point(x, y), int(r * 0.8), c, thick, cv2.LINE_AA)


def draw_inhibit_sign(
    image: Image, centre: tuple[float, float], size_px: float, colour: BGR
) -> None:
    """A circle with a slash: the tool may not run."""
    x, y = centre
    r = int(size_px / 2)
    thick = max(3, int(size_px / 8))
    cv2.circle(image, point(x, y), r, colour, thick, cv2.LINE_AA)
    d = r * 0.7
    cv2.line(image, point(x - d, y - d), point(x + d, y + d), colour, thick, cv2.LINE_AA)


def draw_go_sign(image: Image, centre: tuple[float, float], size_px: float, colour: BGR) -> None:
    """A filled circle in a ring: the tool may run."""
    x, y = centre
    r = int(size_px / 2)
    cv2.circle(image, point(x, y), r, colour, max(3, int(size_px / 8)), cv2.LINE_AA)
    cv2.circle(image, point(x, y), int(r * 0.55), colour, -1, cv2.LINE_AA)


def text_size(text: str, scale: float, thickness: int = 1, font: int = FONT) -> tuple[int, int]:
    (w, h), _ = cv2.getTextSize(text, font, scale, thickness)
    return w, h


def put_text(
    image: Image,
    text: str,
    origin: tuple[float, float],
    scale: float,
    colour: BGR,
    thickness: int = 1,
    font: int = FONT,
    outline: BGR | None = DARK,
) -> None:
    """Text with its baseline at ``origin``; a dark outline keeps it readable on the video."""
    at = point(*origin)
    if outline is not None:
        cv2.putText(image, text, at, font, scale, outline, thickness + 2, cv2.LINE_AA)
    cv2.putText(image, text, at, font, scale, colour, thickness, cv2.LINE_AA)


def wrap(text: str, scale: float, width_px: int, thickness: int = 1, font: int = FONT) -> list[str]:
    lines: list[str] = []
    current = ""
    for word in text.split():
        candidate = f"{current} {word}".strip()
        if current and text_size(candidate, scale, thickness, font)[0] > width_px:
            lines.append(current)
            current = word
        else:
            current = candidate
    if current:
        lines.append(current)
    return lines
