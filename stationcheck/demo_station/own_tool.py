"""A station recording with a tool the bundled model never saw, labelled as an engineer would
on the setup screen's Label tab (demo data).

Used by ``tools/own_tool_demo.py`` (the long demonstration) and its fast test. The engineer is
simulated: the frames the Label tab proposes (:func:`stationcheck.labels.proposal.propose`,
every :data:`PROPOSAL_STEP_FRAMES`-th frame looked at) are clicked first, then the product's
propagation (:mod:`stationcheck.labels.propagation`) runs and the frames it queues are clicked,
:data:`QUEUE_BATCH` at a time, until the click budget is spent or nothing is queued. A click is
the renderer's truth plus 1 px of noise (Gaussian, per axis) on tip and rear (the rear also
where it lies just outside the picture), or "tool not visible" where the truth says the tip is
out of view. After each propagation the engineer looks over the strip of every unlabelled run
beside a "not visible" click (:class:`~stationcheck.labels.propagation.HiddenRun`) and marks the
part next to the click where no strip frame shows the tip (the strip's frames only, as a person
sees them); a strip frame that shows the tip between two "not visible" clicks gets a click. The
labels are stored with :mod:`stationcheck.labels.coco_store`, as the tab's Save does.
"""

from __future__ import annotations

import logging
from collections.abc import Iterator, Sequence
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.demo_station.files import REPO_ROOT
from stationcheck.demo_station.held_out_looks import UNSEEN_ARM, UNSEEN_TOOL
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.errors import InputFileError
from stationcheck.labels import coco_store
from stationcheck.labels.propagation import HiddenRun, SpanCache, propagate
from stationcheck.labels.proposal import propose
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.video_frames import VideoFrames
from stationcheck.pipeline.truth_rows import TruthRow

logger = logging.getLogger(__name__)

RECORDING_SCRIPT = REPO_ROOT / "sample_video" / "look_scenes" / "own_tool_recording.yaml"
CLICK_NOISE_PX = 1.0
PROPOSALS = 20  # the Label tab's default
PROPOSAL_STEP_FRAMES = 3  # as the Label tab
QUEUE_BATCH = 10  # queued frames clicked before propagating again
Grey = npt.NDArray[np.uint8]


def unseen_rig() -> OperatorRig:
    return OperatorRig(UNSEEN_TOOL, UNSEEN_ARM)


def click(row: TruthRow, rng: np.random.Generator) -> FrameLabel:
    """What a careful person clicks: tip and rear plus 1 px noise per axis; "not visible"
    when the tip is out of view."""
    if row.tip_v == 0:
        return FrameLabel(row.frame_index, None, None, "clicked")
    noise = rng.normal(0.0, CLICK_NOISE_PX, 4)
    return FrameLabel(
        row.frame_index,
        (row.tip_x_px + noise[0], row.tip_y_px + noise[1]),
        (row.rear_x_px + noise[2], row.rear_y_px + noise[3]),
        "clicked",
    )


def look_over(run: HiddenRun, rows: Sequence[TruthRow]) -> tuple[list[tuple[int, int]], int | None]:
    """What the engineer marks out of view in one run's strip, from each "not visible" side up
    to the last strip frame before one that shows the tip; and a strip frame showing the tip
    between two "not visible" clicks (to click), if any."""
    strip = run.strip()
    shows = [rows[index].tip_v != 0 for index in strip]
    if not any(shows):
        return [(run.first, run.last)], None
    marks: list[tuple[int, int]] = []
    if run.hidden_before and not shows[0]:
        upto = shows.index(True) - 1
        marks.append((run.first, strip[upto]))
    if run.hidden_after and not shows[-1]:
        back = shows[::-1].index(True) - 1
        marks.append((strip[len(strip) - 1 - back], run.last))
    to_click = strip[shows.index(True)] if run.hidden_before and run.hidden_after else None
    return marks, to_click


def grey_frames(video: Path) -> list[Grey]:
    frames = VideoFrames(video)
    try:
        return [
            np.asarray(cv2.cvtColor(image, cv2.COLOR_BGR2GRAY), np.uint8)
            for _, image in frames.span(0, frames.frame_count - 1)
        ]
    finally:
        frames.close()


def simulate_labelling(
    video: Path, rows: Sequence[TruthRow], budget: int, seed: int, proposals: int = PROPOSALS
) -> tuple[list[FrameLabel], int, int]:
    """Clicked and propagated labels of the recording from at most ``budget`` simulated clicks
    (in frame order), the number of clicks used and the number of out-of-view marks made."""
    grey = grey_frames(video)
    if len(grey) != len(rows):
        raise InputFileError(f"{video}: {len(grey)} frames, truth has {len(rows)} rows")

    def read_span(first: int, last: int) -> Iterator[tuple[int, Grey]]:
        for index in range(first, last + 1):
            yield index, grey[index]

    rng = np.random.default_rng(seed)
    every = ((i, grey[i]) for i in range(0, len(grey), PROPOSAL_STEP_FRAMES))
    clicked = {i: click(rows[i], rng) for i in propose(every, min(proposals, budget))}
    cache: SpanCache = {}
    marks: list[tuple[int, int]] = []
    while True:
        result = propagate(read_span, clicked.values(), cache=cache, out_of_view=marks)
        room = budget - len(clicked)
        new_marks: list[tuple[int, int]] = []
        strip_clicks: list[int] = []
        for run in result.hidden_runs:
            marked, to_click = look_over(run, rows)
            new_marks += marked
            if to_click is not None and to_click not in clicked:
                strip_clicks.append(to_click)
        new_marks = [mark for mark in new_marks if mark not in marks]
        if new_marks:  # (a mark made before and not taken would be made again: never loop)
            marks += new_marks
            continue
        wanted = [*strip_clicks, *(i for i in result.queued() if i not in clicked)]
        if room <= 0 or not wanted:
            break
        for index in wanted[: min(QUEUE_BATCH, room)]:
            clicked[index] = click(rows[index], rng)
    labels = sorted([*clicked.values(), *result.labels], key=lambda label: label.frame_index)
    logger.info(
        "%d clicks and %d out-of-view marks labelled %d of %d frames",
        len(clicked),
        len(marks),
        len(labels),
        len(grey),
    )
    return labels, len(clicked), len(marks)


def save_labels(
    station_dir: Path, video: Path, labels: Sequence[FrameLabel], every: int = 1
) -> coco_store.SaveResult:
    """Saves the labels as the Label tab does (clicked frames always, propagated ones every
    ``every``-th frame) into the station's COCO dataset."""
    kept = [
        label for label in labels if label.source == "clicked" or label.frame_index % every == 0
    ]
    frames = VideoFrames(video)
    try:
        return coco_store.save(station_dir, frames, kept)
    finally:
        frames.close()
