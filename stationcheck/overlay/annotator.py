"""A camera frame plus the station's state, drawn side by side: the image with its zone marks
on the left, the panel on the right."""

from __future__ import annotations

import numpy as np

from stationcheck.core.plan import StationPlan
from stationcheck.overlay.panel import PANEL_WIDTH_PX, PanelPainter
from stationcheck.overlay.scene import draw_scene, short_names
from stationcheck.overlay.station_view import StationView, StationViewBuilder
from stationcheck.overlay.symbols import Image


class Annotator:
    def __init__(self, plan: StationPlan, title: str = "stationcheck") -> None:
        self.plan = plan
        self.names = short_names(plan, StationViewBuilder(plan).position_order())
        self.painter = PanelPainter(plan, self.names, title)

    def canvas_size(self, frame_width_px: int, frame_height_px: int) -> tuple[int, int]:
        return frame_width_px + PANEL_WIDTH_PX, frame_height_px

    def annotate(self, image: Image, view: StationView) -> Image:
        """A new image ``W + PANEL_WIDTH_PX`` wide; ``image`` is left untouched."""
        height, width = image.shape[:2]
        canvas = np.empty((height, width + PANEL_WIDTH_PX, 3), np.uint8)
        scene, panel = canvas[:, :width], canvas[:, width:]
        scene[:] = image
        draw_scene(scene, self.plan, view, self.names)
        self.painter.paint(panel, view)
        return canvas
