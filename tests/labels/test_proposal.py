"""Frame proposals: spread over time, and a rare look is not missed."""

from __future__ import annotations

import numpy as np

from stationcheck.labels.proposal import propose


def _frames(count: int, rare: set[int]):  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(1)
    for index in range(count):
        image = np.full((48, 64), 100, np.uint8) + rng.integers(0, 3, (48, 64), dtype=np.uint8)
        if index in rare:  # something seen in only a few frames (the tool at a far bin)
            image[5:20, 40:60] = 250
        yield index, image


def test_proposals_cover_time_and_a_rare_look() -> None:
    chosen = propose(_frames(300, rare={137, 138, 139}), 10)
    assert len(chosen) == 10 and chosen == sorted(chosen)
    assert chosen[0] == 0 and chosen[-1] == 299  # the even half spans the whole video
    assert {137, 138, 139} & set(chosen)  # farthest-point sampling finds the rare look
    gaps = np.diff([c for c in chosen if c not in {137, 138, 139}])
    assert gaps.max() <= 80


def test_fewer_frames_than_asked_gives_them_all() -> None:
    assert propose(_frames(4, set()), 10) == [0, 1, 2, 3]
    assert propose(_frames(0, set()), 10) == []
