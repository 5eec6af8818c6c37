"""Drawing decisions on frames: IEC 60073 colour meanings, always doubled by shape or words."""

from __future__ import annotations

import itertools
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.observations import PositionRef
from stationcheck.core.plan import StationPlan
from stationcheck.overlay.annotator import Annotator
from stationcheck.overlay.palette import COLOURS
from stationcheck.overlay.panel import PANEL_WIDTH_PX
from stationcheck.overlay.station_view import StationViewBuilder
from stationcheck.overlay.symbols import draw_symbol
from tests.event_examples import tightening, unit_ended, unit_started
from tests.overlay.conftest import fastening

MEANINGS = ("normal", "abnormal", "fault", "action", "neutral")


def _hsv(bgr: tuple[int, int, int]) -> tuple[int, int, int]:
    pixel = np.array([[bgr]], np.uint8)
    h, s, v = cv2.cvtColor(pixel, cv2.COLOR_BGR2HSV)[0, 0]
    return int(h), int(s), int(v)


@pytest.mark.parametrize(
    ("meaning", "hue_range"),
    # IEC 60073 (from memory): green normal, yellow abnormal, red fault (emergency), blue
    # mandatory action, white neutral. OpenCV hue is degrees / 2.
    [("normal", (40, 80)), ("abnormal", (20, 34)), ("fault", (-8, 8)), ("action", (100, 125))],
)
def test_meanings_have_their_iec_60073_hue(meaning: str, hue_range: tuple[int, int]) -> None:
    h, s, v = _hsv(COLOURS[meaning])  # type: ignore[index]
    h = h - 180 if h > 90 + hue_range[1] else h
    assert hue_range[0] <= h <= hue_range[1]
    assert s > 150 and v > 150


def test_neutral_is_white() -> None:
    _, s, v = _hsv(COLOURS["neutral"])
    assert s < 20 and v > 220


def _shape(meaning: str) -> np.ndarray:
    canvas = np.full((40, 40, 3), 128, np.uint8)
    draw_symbol(canvas, meaning, (20, 20), 30)  # type: ignore[arg-type]
    grey = cv2.cvtColor(canvas, cv2.COLOR_BGR2GRAY).astype(int)
    # what is left without colour: darker (-1) or lighter (+1) than the background
    return np.where(grey < 108, -1, np.where(grey > 148, 1, 0))


@pytest.mark.parametrize(("a", "b"), list(itertools.combinations(MEANINGS, 2)))
def test_symbols_differ_in_shape_not_only_in_colour(a: str, b: str) -> None:
    first, second = _shape(a), _shape(b)
    marked = (first != 0) | (second != 0)
    same = (first == second) & marked
    assert (first != 0).sum() > 30 and (second != 0).sum() > 30
    assert same.sum() / marked.sum() < 0.6


def _panel_edges(annotator: Annotator, builder: StationViewBuilder, enabled: bool) -> np.ndarray:
    frame = np.full((480, 640, 3), 90, np.uint8)
    view = builder.view(fastening(enabled), frame_index=1, t_s=0.1)
    canvas = annotator.annotate(frame, view)
    badge = cv2.cvtColor(canvas[30:104, 640:], cv2.COLOR_BGR2GRAY)
    return cv2.Canny(badge, 50, 150) > 0


def test_enabled_and_inhibited_badges_differ_without_colour(plan: StationPlan) -> None:
    annotator, builder = Annotator(plan), StationViewBuilder(plan)
    on, off = _panel_edges(annotator, builder, True), _panel_edges(annotator, builder, False)
    differing = np.logical_xor(on, off).sum() / np.logical_or(on, off).sum()
    assert differing > 0.5  # other words and another sign, not just another fill


def test_annotated_frame_is_the_image_plus_a_panel_and_leaves_the_image_alone(
    plan: StationPlan,
) -> None:
    frame = np.full((480, 640, 3), 90, np.uint8)
    before = frame.copy()
    view = StationViewBuilder(plan).view(fastening(False), frame_index=1, t_s=0.1,
                                         tip_px=(330.0, 290.0), rear_px=(380.0, 420.0),
                                         tip_seen=True)
    canvas = Annotator(plan).annotate(frame, view)
    assert canvas.shape == (480, 640 + PANEL_WIDTH_PX, 3)
    assert np.array_equal(frame, before)
    # the target zone (cover screw 4, centre 320,283) is outlined in the action colour
    ring = canvas[283 - 17 : 283 + 18, 320 - 17 : 320 + 18].reshape(-1, 3)
    assert (np.abs(ring.astype(int) - COLOURS["action"]).sum(axis=1) < 30).sum() > 20


def test_the_view_follows_positions_through_a_unit_and_its_rework(plan: StationPlan) -> None:
    builder = StationViewBuilder(plan)
    zones = plan.steps[2].zones  # type: ignore[union-attr]
    positions = tuple(ev.PlannedPosition("fasten_cover", z, i) for i, z in enumerate(zones, 1))
    builder.fold([
        unit_started(0.0, "PC-1", positions=positions),
        ev.PositionCompleted(1.0, "PC-1", step="fasten_cover", zone="screw_1", position=1,
                             attempts=1, rework=False),
        tightening(2.0, "PC-1", zone="screw_4", position=2, attempt=2, result="NotOK",
                   torque=ev.Measured(3.9, None, None, "N·m"),
                   angle=ev.Measured(52.4, None, None, "deg")),
    ])
    assert builder.done == ["screw_1"]
    assert builder.last_tightening is not None and not builder.last_tightening.ok
    assert builder.last_tightening.torque_nm == 3.9
    again = (ev.PlannedPosition("fasten_cover", "screw_4", 2),)
    builder.fold([unit_started(3.0, "PC-1", rework=True, positions=again)])
    assert sorted(builder.done) == ["screw_1", "screw_2", "screw_3", "screw_5", "screw_6"]
    assert builder.last_tightening is None


def test_the_annotated_video_opens_in_opencv_with_every_frame(
    plan: StationPlan, tmp_path: Path,
) -> None:
    from stationcheck.core.observations import ZoneObservation
    from stationcheck.core.records import Frame, Keypoints, ToolPose
    from stationcheck.pipeline.annotated_video import AnnotatedVideoWriter
    from stationcheck.pipeline.decision_core import DecisionStep
    from stationcheck.pipeline.frame_path import FrameResult, Sighting

    path = tmp_path / "out.mp4"
    writer = AnnotatedVideoWriter(path, plan, fps=30.0)
    for index in range(12):
        frame = Frame(index, index / 30, np.full((480, 640, 3), 20 * index, np.uint8))
        pose = ToolPose(frame.t_s, index, None, None, False, False, 0.0)
        zone = ZoneObservation(frame.t_s, index, None, None, None, 0.0, False)
        seen = Sighting(frame, Keypoints(index, frame.t_s, ()), None, pose, zone)
        writer.on_frame(FrameResult(seen, (DecisionStep(zone, fastening(index % 2 == 0), ()),)))
    writer.on_stop(None)
    writer.raise_if_failed()
    capture = cv2.VideoCapture(str(path))
    assert int(capture.get(cv2.CAP_PROP_FRAME_COUNT)) == 12
    assert int(capture.get(cv2.CAP_PROP_FRAME_WIDTH)) == 640 + PANEL_WIDTH_PX
    capture.release()


@pytest.mark.parametrize(("result", "released", "meaning"),
                         [("OK", True, "normal"), ("NotOK", False, "fault")])
def test_a_finished_unit_is_shown_with_the_meaning_of_its_result(
    plan: StationPlan, result: str, released: bool, meaning: str,
) -> None:
    from stationcheck.core.outputs import Guidance

    builder = StationViewBuilder(plan)
    failed = () if released else (PositionRef("fasten_cover", "screw_3"),)
    builder.fold([unit_ended(9.0, "PC-1", result=result, released=released,
                             failed_positions=failed)])
    output = fastening(False, guidance=Guidance("unit_finished", None, "Unit PC-1 done."),
                       unit_status="ok" if released else "nok", target=None,
                       position_number=0, attempt=0)
    view = builder.view(output, frame_index=1, t_s=9.0)
    assert view.guidance_meaning == meaning
    assert view.last_unit is not None and view.last_unit.failed_zones == (
        () if released else ("screw_3",))
