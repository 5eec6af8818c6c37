"""The side panel beside the camera image: enable badge, unit and step progress, the
instruction, the last tightening, alarms and the last unit's result, then a colour legend."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace

import cv2
import numpy as np

from stationcheck.core.plan import FastenStep, StationPlan
from stationcheck.overlay.palette import COLOURS, DARK, MUTED, PANEL, TEXT_ON
from stationcheck.overlay.station_view import Meaning, StationView
from stationcheck.overlay.symbols import (
    FONT_BOLD,
    Image,
    draw_go_sign,
    draw_inhibit_sign,
    draw_symbol,
    put_text,
    text_size,
    wrap,
)

PANEL_WIDTH_PX = 400
PAD = 12
WHITE = (255, 255, 255)
LEGEND: tuple[tuple[Meaning, str], ...] = (
    ("normal", "normal"),
    ("abnormal", "abnormal"),
    ("fault", "fault"),
    ("action", "your action"),
    ("neutral", "neutral"),
)


def _steady(view: StationView) -> StationView:
    """The view without what changes every frame and is not on the panel (time, tip)."""
    return replace(
        view,
        frame_index=0,
        t_s=0.0,
        tip_px=None,
        rear_px=None,
        tip_seen=False,
        output=replace(view.output, t_s=0.0),
    )


def _label(plan: StationPlan, zone_id: str) -> str:
    try:
        return plan.zone(zone_id).label or zone_id
    except KeyError:
        return zone_id


class PanelPainter:
    """Draws the panel for one view onto ``panel`` (H x PANEL_WIDTH_PX x 3)."""

    def __init__(self, plan: StationPlan, names: Mapping[str, str], title: str) -> None:
        self.plan = plan
        self.names = names
        self.title = title
        self.fasten_zones = {
            step.id: step.zones for step in plan.steps if isinstance(step, FastenStep)
        }
        self._key: StationView | None = None
        self._cached: Image | None = None

    def paint(self, panel: Image, view: StationView) -> None:
        """Redraws the panel only when what it shows changed; the frame stamp always."""
        key = _steady(view)
        if key != self._key or self._cached is None or self._cached.shape != panel.shape:
            self._cached = np.empty_like(panel)
            self._paint_steady(self._cached, view)
            self._key = key
        panel[:] = self._cached
        stamp = f"frame {view.frame_index}  {view.t_s:7.2f} s"
        w, _ = text_size(stamp, 0.45)
        put_text(panel, stamp, (panel.shape[1] - PAD - w, 20), 0.45, MUTED, 1, outline=None)

    def _paint_steady(self, panel: Image, view: StationView) -> None:
        panel[:] = PANEL
        put_text(panel, self.title, (PAD, 20), 0.45, MUTED, 1, outline=None)
        y = self._badge(panel, view, 30)
        y = self._unit(panel, view, y + 10)
        y = self._left_for_rework(panel, view, y)
        y = self._instruction(panel, view, y + 8)
        y = self._last_result(panel, view, y + 8)
        y = self._alarms(panel, view, y + 4)
        self._legend(panel)

    def _badge(self, panel: Image, view: StationView, y: int) -> int:
        width = panel.shape[1]
        meaning = view.enable_meaning
        height = 74
        cv2.rectangle(panel, (PAD, y), (width - PAD, y + height), COLOURS[meaning], -1)
        cv2.rectangle(panel, (PAD, y), (width - PAD, y + height), DARK, 2)
        ink = TEXT_ON[meaning]
        centre = (PAD + 36, y + height / 2)
        if view.output.tool_enabled:
            draw_go_sign(panel, centre, 44, ink)
            words = "TOOL ENABLED"
        else:
            draw_inhibit_sign(panel, centre, 44, ink)
            words = "TOOL INHIBITED"
        put_text(panel, words, (PAD + 70, y + 34), 0.85, ink, 2, FONT_BOLD, None)
        put_text(panel, view.enable_reason_words, (PAD + 70, y + 60), 0.5, ink, 1, outline=None)
        return y + height

    def _unit(self, panel: Image, view: StationView, y: int) -> int:
        output = view.output
        if output.serial is None:
            put_text(panel, "No unit on the station", (PAD, y + 20), 0.6, WHITE, 1, outline=None)
            return y + 30
        rework = "  (rework pass)" if output.rework else ""
        put_text(
            panel, f"Unit {output.serial}{rework}", (PAD, y + 20), 0.65, WHITE, 1, FONT_BOLD, None
        )
        y += 30
        if output.step_count:
            step = (output.step_id or "").replace("_", " ")
            put_text(
                panel,
                f"Step {output.step_number} of {output.step_count}: {step}",
                (PAD, y + 16),
                0.5,
                WHITE,
                1,
                outline=None,
            )
            y += 24
        zones = self.fasten_zones.get(output.step_id or "", ())
        if zones:
            y = self._position_row(panel, view, zones, y)
        return y

    def _position_row(self, panel: Image, view: StationView, zones: tuple[str, ...], y: int) -> int:
        size, gap = 34, 8
        x = PAD
        target = view.output.target.zone if view.output.target is not None else None
        for zone in zones:
            name = self.names.get(zone, "?")
            if zone == target:
                meaning: Meaning = "normal" if view.output.tool_enabled else "action"
                cv2.rectangle(panel, (x, y), (x + size, y + size), COLOURS[meaning], -1)
                ink = TEXT_ON[meaning]
            elif zone in view.failed_zones:
                cv2.rectangle(panel, (x, y), (x + size, y + size), COLOURS["fault"], -1)
                ink = WHITE
            elif zone in view.done_zones:
                cv2.rectangle(panel, (x, y), (x + size, y + size), COLOURS["normal"], -1)
                ink = WHITE
            else:
                cv2.rectangle(panel, (x, y), (x + size, y + size), COLOURS["neutral"], 1)
                ink = WHITE
            w, h = text_size(name, 0.55, 1, FONT_BOLD)
            put_text(
                panel, name, (x + (size - w) / 2, y + (size + h) / 2), 0.55, ink, 1, FONT_BOLD, None
            )
            if zone in view.failed_zones:
                draw_symbol(panel, "fault", (x + size - 3, y + 3), 12)
            elif zone in view.done_zones and zone != target:
                draw_symbol(panel, "normal", (x + size - 4, y + 4), 12)
            x += size + gap
        y += size + 6
        output = view.output
        if output.position_number:
            label = f" - {_label(self.plan, target)}" if target else ""  # OpenCV fonts: ASCII
            text = (
                f"order {output.position_number} of {len(zones)}{label}, attempt {output.attempt}"
            )
            put_text(panel, text, (PAD, y + 16), 0.5, WHITE, 1, outline=None)
            y += 22
        return y

    def _left_for_rework(self, panel: Image, view: StationView, y: int) -> int:
        if not view.failed_zones or view.output.unit_status != "running":
            return y
        labels = ", ".join(_label(self.plan, z) for z in view.failed_zones)
        draw_symbol(panel, "fault", (PAD + 9, y + 11), 16)
        put_text(panel, f"Left for rework: {labels}", (PAD + 24, y + 17), 0.5, COLOURS["fault"], 1)
        return y + 24

    def _instruction(self, panel: Image, view: StationView, y: int) -> int:
        width = panel.shape[1]
        meaning = view.guidance_meaning
        lines = wrap(view.output.guidance.words, 0.62, width - 2 * PAD - 44, 1, FONT_BOLD)[:3]
        height = 14 + 26 * len(lines)
        cv2.rectangle(panel, (PAD, y), (width - PAD, y + height), (70, 66, 62), -1)
        cv2.rectangle(panel, (PAD, y), (PAD + 6, y + height), COLOURS[meaning], -1)
        draw_symbol(panel, meaning, (PAD + 24, y + height / 2), 22)
        for i, line in enumerate(lines):
            put_text(panel, line, (PAD + 42, y + 28 + 26 * i), 0.62, WHITE, 1, FONT_BOLD, None)
        return y + height

    def _last_result(self, panel: Image, view: StationView, y: int) -> int:
        result = view.last_tightening
        if result is not None:
            meaning: Meaning = "normal" if result.ok else "fault"
            head = f"Last tightening: {_label(self.plan, result.zone)}, attempt {result.attempt}"
            put_text(panel, head, (PAD, y + 16), 0.48, MUTED, 1, outline=None)
            values = []
            if result.torque_nm is not None:
                values.append(f"{result.torque_nm:.2f} Nm")
            if result.angle_deg is not None:
                values.append(f"{result.angle_deg:.1f} deg")
            draw_symbol(panel, meaning, (PAD + 10, y + 34), 18)
            put_text(
                panel,
                "OK" if result.ok else "NOK",
                (PAD + 26, y + 42),
                0.7,
                COLOURS[meaning],
                2,
                FONT_BOLD,
            )
            put_text(panel, "  ".join(values), (PAD + 90, y + 41), 0.6, WHITE, 1, outline=None)
            y += 50
        unit = view.last_unit
        if unit is not None and view.output.unit_status != "running":
            meaning = "normal" if unit.released else "fault"
            words = f"Unit {unit.serial}: {unit.result}"
            words += ", released" if unit.released else ", NOT released"
            draw_symbol(panel, meaning, (PAD + 10, y + 14), 18)
            put_text(panel, words, (PAD + 26, y + 20), 0.55, COLOURS[meaning], 1, FONT_BOLD)
            y += 26
            if unit.failed_zones:
                labels = ", ".join(_label(self.plan, z) for z in unit.failed_zones)
                put_text(
                    panel, f"rework: {labels}", (PAD + 26, y + 14), 0.5, WHITE, 1, outline=None
                )
                y += 22
        return y

    def _alarms(self, panel: Image, view: StationView, y: int) -> int:
        width = panel.shape[1]
        for alarm in view.alarms[:3]:
            for i, line in enumerate(wrap(alarm.words, 0.55, width - 2 * PAD - 30, 1)[:2]):
                if i == 0:
                    draw_symbol(panel, alarm.meaning, (PAD + 10, y + 12), 18)
                put_text(panel, line, (PAD + 26, y + 18), 0.55, COLOURS[alarm.meaning], 1)
                y += 22
        return y

    def _legend(self, panel: Image) -> None:
        y = panel.shape[0] - 16
        x = PAD
        for meaning, words in LEGEND:
            draw_symbol(panel, meaning, (x + 7, y - 4), 13)
            put_text(panel, words, (x + 17, y), 0.38, MUTED, 1, outline=None)
            x += 19 + text_size(words, 0.38)[0] + 10
        cv2.line(panel, (PAD, y - 20), (panel.shape[1] - PAD, y - 20), (90, 90, 90), 1)
