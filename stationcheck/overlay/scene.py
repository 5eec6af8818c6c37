"""Marks drawn on the camera image itself: zones with their state, the tool tip, a camera-moved
banner. Each state has its colour meaning and a symbol or a word beside it."""

from __future__ import annotations

from collections.abc import Mapping

import cv2
import numpy as np

from stationcheck.core.plan import StationPlan, ZoneSpec
from stationcheck.overlay.palette import COLOURS, DARK, TEXT_ON
from stationcheck.overlay.station_view import Meaning, StationView
from stationcheck.overlay.symbols import (
    FONT_BOLD,
    Image,
    draw_symbol,
    point,
    put_text,
    text_size,
)

FILL_ALPHA = 0.30


def _polygon(zone: ZoneSpec) -> np.ndarray:
    return np.array([point(x, y) for x, y in zone.polygon_px], np.int32)


def _centre(zone: ZoneSpec) -> tuple[float, float]:
    xs = [p[0] for p in zone.polygon_px]
    ys = [p[1] for p in zone.polygon_px]
    return (sum(xs) / len(xs), sum(ys) / len(ys))


def _box(zone: ZoneSpec) -> tuple[float, float, float, float]:
    xs = [p[0] for p in zone.polygon_px]
    ys = [p[1] for p in zone.polygon_px]
    return min(xs), min(ys), max(xs), max(ys)


def _fill(image: Image, zone: ZoneSpec, colour: tuple[int, int, int], alpha: float) -> None:
    h, w = image.shape[:2]
    x0, y0, x1, y1 = (int(v) for v in _box(zone))
    x0, y0, x1, y1 = max(0, x0), max(0, y0), min(w, x1 + 2), min(h, y1 + 2)
    if x1 <= x0 or y1 <= y0:
        return
    roi = image[y0:y1, x0:x1]
    layer = roi.copy()
    shifted = _polygon(zone) - np.array([x0, y0], np.int32)
    cv2.fillPoly(layer, [shifted], colour, cv2.LINE_AA)
    cv2.addWeighted(layer, alpha, roi, 1.0 - alpha, 0.0, dst=roi)


def _outline(
    image: Image, zone: ZoneSpec, colour: tuple[int, int, int], thickness: int, halo: bool = False
) -> None:
    """The zone's outline on a dark rim; ``halo`` adds a white rim so it stands out on a
    background of its own colour."""
    pts = _polygon(zone)
    cv2.polylines(image, [pts], True, DARK, thickness + (6 if halo else 2), cv2.LINE_AA)
    if halo:
        cv2.polylines(image, [pts], True, (255, 255, 255), thickness + 3, cv2.LINE_AA)
    cv2.polylines(image, [pts], True, colour, thickness, cv2.LINE_AA)


def _tag(
    image: Image, text: str, anchor: tuple[float, float], meaning: Meaning, above: bool = True
) -> None:
    """A small filled label in the meaning's colour, centred on ``anchor``'s x."""
    scale = 0.42
    w, h = text_size(text, scale, 1, FONT_BOLD)
    x = anchor[0] - w / 2 - 3
    y = anchor[1] - h - 8 if above else anchor[1] + 4
    x = min(max(x, 1), image.shape[1] - w - 8)
    y = min(max(y, 1), image.shape[0] - h - 8)
    cv2.rectangle(image, point(x, y), point(x + w + 6, y + h + 6), COLOURS[meaning], -1)
    cv2.rectangle(image, point(x, y), point(x + w + 6, y + h + 6), DARK, 1)
    put_text(image, text, (x + 3, y + h + 3), scale, TEXT_ON[meaning], 1, FONT_BOLD, None)


def short_names(plan: StationPlan, order: Mapping[str, int]) -> dict[str, str]:
    """What to write in each fastener zone: the number its label ends with ("cover screw 4"
    -> "4", as the instructions name it), else its place in the tightening order."""
    names: dict[str, str] = {}
    for zone in plan.zones:
        if zone.kind != "fastener":
            continue
        last = (zone.label or "").split()[-1:] or [""]
        names[zone.id] = last[0] if last[0].isdigit() else str(order.get(zone.id, "?"))
    return names


def fastener_state(view: StationView, zone_id: str) -> str:
    target = view.output.target
    if target is not None and target.zone == zone_id:
        return "enabled" if view.output.tool_enabled else "target"
    if view.wrong_zone == zone_id:
        return "wrong"
    if zone_id in view.failed_zones:
        return "failed"
    if zone_id in view.done_zones:
        return "done"
    return "pending"


def draw_fastener(image: Image, zone: ZoneSpec, name: str, state: str, rework: bool) -> None:
    centre = _centre(zone)
    _, y0, x1, y1 = _box(zone)
    corner = (x1 - 2, y0 + 2)
    if state == "done":
        _fill(image, zone, COLOURS["normal"], FILL_ALPHA)
        _outline(image, zone, COLOURS["normal"], 2)
        draw_symbol(image, "normal", corner, 14)
    elif state == "failed":
        _outline(image, zone, COLOURS["fault"], 3)
        draw_symbol(image, "fault", corner, 15)
        _tag(image, "NOK", (centre[0], y1), "fault", above=False)
    elif state == "wrong":
        _outline(image, zone, COLOURS["abnormal"], 3)
        draw_symbol(image, "abnormal", corner, 16)
        _tag(image, "WRONG", (centre[0], y0), "abnormal")
    elif state == "enabled":
        _fill(image, zone, COLOURS["normal"], FILL_ALPHA)
        _outline(image, zone, COLOURS["normal"], 3)
        _tag(image, "TOOL ON", (centre[0], y0), "normal")
    elif state == "target":
        _outline(image, zone, COLOURS["action"], 3, halo=True)
        _tag(image, "REWORK" if rework else "NEXT", (centre[0], y0), "action")
    else:
        _outline(image, zone, COLOURS["neutral"], 1)
    w, h = text_size(name, 0.5, 1, FONT_BOLD)
    put_text(
        image, name, (centre[0] - w / 2, centre[1] + h / 2), 0.5, (255, 255, 255), 1, FONT_BOLD
    )


def draw_area(image: Image, zone: ZoneSpec, state: str, caption: str) -> None:
    """A bin or check zone: outline, its label, and a tag for its state."""
    x0, y0, x1, y1 = _box(zone)
    centre = _centre(zone)
    meaning: Meaning = {
        "target": "action",
        "wrong": "abnormal",
        "ok": "normal",
        "failed": "fault",
    }.get(state, "neutral")  # type: ignore[assignment]
    _outline(
        image, zone, COLOURS[meaning], 1 if meaning == "neutral" else 3, halo=meaning != "neutral"
    )
    label = zone.label or zone.id
    if text_size(label, 0.4)[0] + 8 <= x1 - x0:
        put_text(image, label, (x0 + 4, y0 + 14), 0.4, (255, 255, 255))
    else:  # a small zone: its label goes above it
        put_text(image, label, (x0, y0 - 6), 0.4, (255, 255, 255))
    if state != "idle":
        _tag(image, caption, (centre[0], y1), meaning, above=False)
        draw_symbol(image, meaning, (x1 - 10, y0 + 26), 16)


def draw_tip(image: Image, view: StationView) -> None:
    tip = view.tip_px
    if tip is None:
        return
    if view.rear_px is not None:
        cv2.line(image, point(*view.rear_px), point(*tip), DARK, 3, cv2.LINE_AA)
        cv2.line(image, point(*view.rear_px), point(*tip), (200, 200, 200), 1, cv2.LINE_AA)
        cv2.circle(image, point(*view.rear_px), 4, (200, 200, 200), -1, cv2.LINE_AA)
    colour = COLOURS["normal"] if view.output.tool_enabled else (255, 255, 255)
    cv2.circle(image, point(*tip), 9, DARK, 4, cv2.LINE_AA)
    cv2.circle(image, point(*tip), 9, colour, 2, cv2.LINE_AA)
    if view.tip_seen:
        for dx, dy in ((1, 0), (0, 1)):
            a = point(tip[0] - 13 * dx, tip[1] - 13 * dy)
            b = point(tip[0] + 13 * dx, tip[1] + 13 * dy)
            cv2.line(image, a, b, colour, 1, cv2.LINE_AA)
    put_text(
        image, "tip" if view.tip_seen else "tip (held)", (tip[0] + 11, tip[1] + 20), 0.4, colour
    )


def draw_camera_banner(image: Image) -> None:
    h = 34
    cv2.rectangle(image, (0, 0), (image.shape[1], h), COLOURS["fault"], -1)
    draw_symbol(image, "fault", (20, h / 2), 24, (255, 255, 255), ink=COLOURS["fault"])
    put_text(
        image,
        "CAMERA MOVED - zones do not match the view",
        (40, 23),
        0.6,
        (255, 255, 255),
        1,
        FONT_BOLD,
        None,
    )


def draw_scene(
    image: Image, plan: StationPlan, view: StationView, names: Mapping[str, str]
) -> None:
    """All marks on the camera image (drawn in place)."""
    output = view.output
    target_zone = output.guidance.target
    for zone in plan.zones:
        if zone.kind == "fastener":
            state = fastener_state(view, zone.id)
            draw_fastener(image, zone, names.get(zone.id, zone.id), state, output.rework)
        elif zone.kind == "bin":
            if view.wrong_bin == zone.id:
                draw_area(image, zone, "wrong", "WRONG BIN")
            elif output.guidance.kind in ("take_part", "wrong_bin") and target_zone == zone.id:
                draw_area(image, zone, "target", "TAKE HERE")
            else:
                draw_area(image, zone, "idle", "")
        else:
            checking = output.guidance.kind == "check" and target_zone == zone.id
            if checking:
                seen = view.check_verdict or "not judged yet"
                draw_area(image, zone, "target", f"CHECK: {seen}")
            else:
                draw_area(image, zone, "idle", "")
    draw_tip(image, view)
    if "camera_moved" in output.alarms:
        draw_camera_banner(image)
