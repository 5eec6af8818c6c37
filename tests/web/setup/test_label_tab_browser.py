"""The Label tab in a real browser (Debian's chromium, headless): open a clip of the demo
renderer's video, click tip and rear on 5 frames (one of them zoomed in), propagate, mark one
frame "not visible", save; the dataset loads with pycocotools (the COCO reference API) and the
clicked points match the renderer's truth within 2 px. Then two more "not visible" frames and
the strips beside them: the runs marked out of view are stored as tool-absent frames, and the
renderer's truth agrees. The Train button runs a stand-in child
(the product runs ``stationcheck train``) and its Cancel ends it."""

from __future__ import annotations

import csv
import json
import sys
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from stationcheck.sources.recorder import record
from stationcheck.sources.video_file import VideoFileSource
from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace
from stationcheck.web.setup.labelling import LabelService, TrainCommand
from stationcheck.web.setup.setup_routes import SetupApp
from tests.web.setup.conftest import DEMO_VIDEO, REPO

CLIP_FIRST = 2840  # the tool is in view until sample frame 2898, then out of view
CLIP_FRAMES = 80
CLICKED = (0, 12, 25, 38, 50)
NOT_VISIBLE = 70
NOT_VISIBLE_TOO = 78
Truth = dict[int, tuple[tuple[float, float], tuple[float, float], bool]]


@pytest.fixture(scope="module")
def clip(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Truth]:
    """80 frames of the rendered sample video (recorded as the record command does) and the
    renderer's per-frame truth for them."""
    folder = tmp_path_factory.mktemp("clip")
    source = VideoFileSource(DEMO_VIDEO, first_frame=CLIP_FIRST, max_frames=CLIP_FRAMES)
    try:
        record(source, folder / "clip.mp4", CLIP_FRAMES)
    finally:
        source.close()
    truth: Truth = {}
    with (REPO / "sample_video" / "demo_station_truth.csv").open() as handle:
        for row in csv.DictReader(handle):
            index = int(row["frame_index"]) - CLIP_FIRST
            if 0 <= index < CLIP_FRAMES:
                truth[index] = (
                    (float(row["tip_x_px"]), float(row["tip_y_px"])),
                    (float(row["rear_x_px"]), float(row["rear_y_px"])),
                    row["tip_v"] == "2",
                )
    return folder / "clip.mp4", truth


STAND_IN = """
import json, sys, time
for step in range(1, 4):
    print(json.dumps({"phase": "fine-tune", "step": step, "max_steps": 100,
                      "elapsed_s": step * 1.0, "left_s": 97.0 - step}), flush=True)
print("not a progress line", flush=True)
while True:  # a long training: ends only when cancelled
    time.sleep(0.05)
"""


@pytest.fixture
def label_tab(page: Any, workspace: Path, clip: tuple[Path, Truth]) -> Iterator[Callable[..., Any]]:
    servers: list[WebServer] = []
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    recordings = workspace / "recordings"
    recordings.mkdir()
    (recordings / "clip.mp4").write_bytes(clip[0].read_bytes())

    def start(train: TrainCommand | None = None) -> Any:
        session = SetupSession.open(Workspace(workspace), workspace / "configs/demo_station.yaml")
        labels = LabelService(session, train) if train is not None else LabelService(session)
        router = SetupApp(session, labels).router()
        server = WebServer(router, "127.0.0.1", 0, AccessRule(None)).start()
        servers.append(server)
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']")
        page.click("#tabs button[data-tab='label']")
        page.fill("input[name='label-video']", "../recordings/clip.mp4")
        page.dispatch_event("input[name='label-video']", "change")
        page.click("#label-open")
        page.wait_for_selector("#labeller[data-frame]")
        return page

    yield start
    for server in servers:
        server.close()
    assert errors == []


def _go(page: Any, index: int) -> None:
    page.fill("input[name='label-goto']", str(index))
    page.dispatch_event("input[name='label-goto']", "change")
    page.wait_for_selector(f"#labeller[data-frame='{index}']")


def _click_image_point(page: Any, point: tuple[float, float]) -> None:
    page.mouse.click(*_screen(page, point))


def _move_to_image_point(page: Any, point: tuple[float, float]) -> None:
    page.mouse.move(*_screen(page, point))


def _screen(page: Any, point: tuple[float, float]) -> tuple[float, float]:
    x, y = page.evaluate(
        """([x, y]) => { const svg = document.getElementById('label-canvas');
             const p = svg.createSVGPoint(); p.x = x; p.y = y;
             const s = p.matrixTransform(svg.getScreenCTM()); return [s.x, s.y]; }""",
        list(point),
    )
    return float(x), float(y)


def test_label_five_frames_propagate_hide_one_and_save(
    label_tab: Callable[..., Any], clip: tuple[Path, Truth], workspace: Path
) -> None:
    from pycocotools.coco import COCO  # the COCO reference API reads what the screen wrote

    truth = clip[1]
    page = label_tab()
    assert "Enter / Space" in page.inner_text("#label-legend")  # the keys are shown
    for number, index in enumerate(CLICKED):
        _go(page, index)
        tip, rear, visible = truth[index]
        assert visible
        if number == 1:  # zoomed in at the tip: the clicks still land on the image points
            before = page.get_attribute("#label-canvas", "viewBox")
            _move_to_image_point(page, tip)
            page.mouse.wheel(0, -100)
            page.wait_for_function(
                "(old) => document.getElementById('label-canvas').getAttribute('viewBox') !== old",
                arg=before,
            )
        _click_image_point(page, tip)
        _click_image_point(page, rear)
        page.wait_for_selector(f"#label-bar i.clicked >> nth={number}", state="attached")
    _go(page, NOT_VISIBLE)
    assert not truth[NOT_VISIBLE][2]
    page.keyboard.press("n")
    page.keyboard.press("p")
    page.wait_for_selector("#label-note:has-text('frames propagated from 6 clicked')")
    propagated = int(page.inner_text("#label-note").split(" frames propagated")[0])
    assert propagated > 0
    assert page.locator("#label-strip figure").count() > 0  # the review strip
    page.click("#label-save")
    page.wait_for_selector("#label-note:has-text('saved')")

    dataset = workspace / "configs" / "labels" / "coco.json"
    coco = COCO(str(dataset))
    images = {image["frame_index"]: image for image in coco.dataset["images"]}
    assert len(images) == len(CLICKED) + 1 + propagated
    hidden = images[NOT_VISIBLE]
    assert hidden["tool_visible"] is False and coco.getAnnIds(imgIds=[hidden["id"]]) == []
    errors = []
    for index, image in images.items():
        if index == NOT_VISIBLE:
            continue
        (note,) = coco.loadAnns(coco.getAnnIds(imgIds=[image["id"]]))
        assert note["label_source"] == ("clicked" if index in CLICKED else "propagated")
        tip, rear, _ = truth[index]
        tip_error = float(np.hypot(note["keypoints"][0] - tip[0], note["keypoints"][1] - tip[1]))
        if index in CLICKED:
            assert tip_error <= 2.0, (index, note["keypoints"], tip)
            if note["keypoints"][5] == 2:
                rear_error = np.hypot(
                    note["keypoints"][3] - rear[0], note["keypoints"][4] - rear[1]
                )
                assert rear_error <= 2.0, (index, note["keypoints"], rear)
            else:  # only a rear outside the picture is left unlabelled
                assert not (0 <= rear[0] <= 639 and 0 <= rear[1] <= 479)
        else:
            errors.append(tip_error)
        picture = dataset.parent / "images" / image["file_name"]
        assert picture.is_file(), picture
    assert np.median(errors) <= 3.0, errors

    # a second "not visible" frame: the run between the two is looked over in its strip
    _go(page, NOT_VISIBLE_TOO)
    page.keyboard.press("n")
    page.keyboard.press("p")
    page.wait_for_selector("#label-note:has-text('frames propagated from 7 clicked')")
    _go(page, NOT_VISIBLE_TOO)
    page.wait_for_selector("#label-hidden-strip figure[data-frame='77']")
    page.keyboard.press("v")  # no tool in any of 71..77
    page.wait_for_selector("#label-note:has-text('7 marked out of view')")
    # the run before frame 70: mark from a picture that shows no tool up to 70
    _go(page, NOT_VISIBLE - 1)
    strip = [
        int(f) for f in page.locator("#label-hidden-strip figure").evaluate_all(
            "(cells) => cells.map((c) => c.dataset.frame)"
        )
    ]
    assert strip and max(strip) == NOT_VISIBLE - 1
    start = min(i for i in strip if not truth[i][2] and i >= 60)
    page.click(f"#label-hidden-strip figure[data-frame='{start}']")
    marked = 7 + NOT_VISIBLE - start
    page.wait_for_selector(f"#label-note:has-text('{marked} marked out of view')")
    page.click("#label-save")
    page.wait_for_selector("#label-note:has-text('saved')")
    coco = COCO(str(dataset))
    absent = {
        image["frame_index"]: image
        for image in coco.dataset["images"]
        if image["tool_visible"] is False
    }
    expected = {NOT_VISIBLE, NOT_VISIBLE_TOO, *range(71, 78), *range(start, NOT_VISIBLE)}
    assert set(absent) == expected
    assert all(not truth[i][2] for i in absent)  # the renderer's truth: no tip in view
    assert {absent[i]["label_source"] for i in range(71, 78)} == {"propagated"}
    assert absent[NOT_VISIBLE_TOO]["label_source"] == "clicked"
    assert all(coco.getAnnIds(imgIds=[image["id"]]) == [] for image in absent.values())


def test_train_button_shows_progress_and_cancel_ends_the_child(
    label_tab: Callable[..., Any], workspace: Path
) -> None:
    labels = workspace / "configs" / "labels"
    labels.mkdir()
    (labels / "coco.json").write_text(json.dumps({"images": [], "annotations": []}))
    page = label_tab(train=lambda config: [sys.executable, "-c", STAND_IN])
    page.click("#train-start")
    page.wait_for_selector("#train-progress[value='3']")
    assert "fine-tune: 2 min left (94 s)" in page.inner_text("#train-left")
    page.click("#train-cancel")
    page.wait_for_selector("#train-result:has-text('cancelled')")
