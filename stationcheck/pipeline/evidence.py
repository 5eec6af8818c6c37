"""Evidence images: a crop of the fastener zone saved with each tightening result.

Off by default (``log.evidence_images``). When on, the frame taken at or just after a tightening
result is cropped to the zone's bounding box plus a small margin (never the whole frame, so no
operator faces are stored), written as PNG into ``evidence/`` next to the step log, and the
event carries the path relative to the log's folder. A failed write is logged and the event is
kept without a path: evidence never costs an event or holds up a decision. Files older than
``log.retention_days`` are removed when a run starts (:func:`prune_evidence`).
"""

from __future__ import annotations

import logging
import math
import re
import time
from collections.abc import Sequence
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import Event
from stationcheck.core.plan import StationPlan
from stationcheck.core.records import Frame
from stationcheck.store.retention import RetentionReport, apply_retention, with_evidence
from stationcheck.store.sqlite_log import SqliteStepLog

logger = logging.getLogger(__name__)

EVIDENCE_FOLDER = "evidence"
DEFAULT_MARGIN_PX = 12
_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")

Box = tuple[int, int, int, int]  # x0, y0, x1, y1 (x1, y1 exclusive)


def evidence_folder(log_path: Path) -> Path:
    return log_path.parent / EVIDENCE_FOLDER


def safe_name(text: str) -> str:
    """Letters, digits, ``.``, ``_`` and ``-`` only; never empty, never starting with a dot."""
    cleaned = _UNSAFE.sub("_", text).strip("._")
    return cleaned or "x"


def crop_box(
    polygon_px: Sequence[tuple[float, float]], margin_px: int, width_px: int, height_px: int
) -> Box:
    """The polygon's bounding box grown by ``margin_px`` on every side, clipped to the frame."""
    if margin_px < 0:
        raise ValueError(f"margin_px must be >= 0, got {margin_px}")
    xs = [p[0] for p in polygon_px]
    ys = [p[1] for p in polygon_px]
    x0 = max(0, math.floor(min(xs)) - margin_px)
    y0 = max(0, math.floor(min(ys)) - margin_px)
    x1 = min(width_px, math.ceil(max(xs)) + margin_px)
    y1 = min(height_px, math.ceil(max(ys)) + margin_px)
    if x1 <= x0 or y1 <= y0:
        raise ValueError(
            f"zone box {(x0, y0, x1, y1)} lies outside the {width_px}x{height_px} frame"
        )
    return x0, y0, x1, y1


class EvidenceWriter:
    """Sees every frame (:meth:`see`) and turns tightening results into events with an image."""

    def __init__(
        self, plan: StationPlan, log_folder: Path, margin_px: int = DEFAULT_MARGIN_PX
    ) -> None:
        self.polygons = {zone.id: zone.polygon_px for zone in plan.zones}
        self.log_folder = log_folder
        self.margin_px = margin_px
        self.images_written = 0
        self.failures = 0
        self._frame: Frame | None = None
        self._passes: dict[str, int] = {}

    def see(self, frame: Frame) -> None:
        self._frame = frame

    def attach(self, events: Sequence[Event]) -> tuple[Event, ...]:
        out = []
        for event in events:
            if isinstance(event, ev.UnitStarted) and event.serial is not None:
                self._passes[event.serial] = self._passes.get(event.serial, 0) + 1
            elif isinstance(event, ev.TighteningResult):
                event = self._with_image(event)
            out.append(event)
        return tuple(out)

    def _with_image(self, event: ev.TighteningResult) -> Event:
        zone = event.zone
        if self._frame is None or zone not in self.polygons:
            logger.warning(
                "no evidence image for the tightening result at %.3f s "
                "(no frame or unknown zone %r)",
                event.t_s,
                zone,
            )
            self.failures += 1
            return event
        serial = event.serial or "no-serial"
        name = f"{safe_name(serial)}_pass{self._passes.get(serial, 1)}_{safe_name(zone)}_attempt{event.attempt}.png"
        relative = Path(EVIDENCE_FOLDER) / name
        try:
            self._write(self.log_folder / relative, self._crop(zone, self._frame.image))
        except (OSError, ValueError, cv2.error) as exc:
            logger.warning(
                "evidence image %s not written, result logged without it: %s", relative, exc
            )
            self.failures += 1
            return event
        self.images_written += 1
        return with_evidence(event, relative.as_posix())

    def _crop(self, zone: str, image: npt.NDArray[np.uint8]) -> npt.NDArray[np.uint8]:
        height, width = image.shape[:2]
        x0, y0, x1, y1 = crop_box(self.polygons[zone], self.margin_px, width, height)
        return image[y0:y1, x0:x1]

    @staticmethod
    def _write(path: Path, image: npt.NDArray[np.uint8]) -> None:
        ok, encoded = cv2.imencode(".png", image)
        if not ok:
            raise ValueError("PNG encoding failed")
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(encoded.tobytes())


def prune_evidence(
    log: SqliteStepLog, retention_days: float, now_s: float | None = None
) -> RetentionReport:
    """Remove evidence images older than ``retention_days`` (by wall-clock record time); the
    rows keep their paths."""
    return apply_retention(
        log,
        retention_days,
        time.time() if now_s is None else now_s,
        basis="recorded_at",
        evidence=True,
        rows=False,
        evidence_root=log.path.parent,
    )
