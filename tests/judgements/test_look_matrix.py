"""A small subset of the look matrix (the whole grid: python -m stationcheck.benches.look_matrix).

Keypoints come from the ground truth, so only the image checks are on trial; the decisions are
scored against the rendered scene's ground truth (when the hand was in which bin).
"""

from __future__ import annotations

import pytest

from stationcheck.benches.look_matrix import (
    FRESH_SCENE,
    HELDOUT_SCENE,
    TOO_DARK,
    TUNING_SCENE,
    Cell,
    run_cell,
)

# (cell, scene, frames): the held-out scene's first unit (frames 0-292) has a wrong-bin reach
SUBSET = [
    pytest.param(Cell("x0.45+vignette+warm", 6.0, 15, 1.2), TUNING_SCENE, None,
                 id="dark, warm, vignette, noise 6, JPEG 15, blur (tuning scene)"),
    pytest.param(Cell("x0.6", 3.0, 40, 0.0), FRESH_SCENE, 290,
                 id="dim, noise 3, JPEG 40 (held out)"),
]


@pytest.mark.parametrize(("cell", "scene", "frames"), SUBSET)
def test_no_pick_fails_open_and_no_false_camera_move(cell: Cell, scene: object,
                                                     frames: int | None) -> None:
    result = run_cell(cell, scene, max_frames=frames)  # type: ignore[arg-type]
    assert result.early_picks == 0, result.line()
    assert result.wrong_reaches >= 1 and result.wrong_missed == 0, result.line()
    assert result.false_moved == 0, result.line()
    assert result.enabled_unjudged == 0, result.line()
    if result.status == "runs":  # judged throughout: every pick it had to see was seen
        assert result.picks_confirmed == result.picks_expected >= 2, result.line()


def test_a_picture_too_dark_to_judge_says_so_and_stays_inhibited() -> None:
    result = run_cell(Cell(TOO_DARK, 6.0, 15, 1.2), HELDOUT_SCENE, max_frames=240)
    assert result.status == "cannot judge", result.line()
    assert result.unjudged_frames >= result.frames - 2, result.line()  # from the first frames
    assert result.picks_confirmed == 0 and result.enabled_frames == 0, result.line()
