"""A contact sheet of the sample video: one labelled frame per kind of scene (demo data)."""

from __future__ import annotations

from typing import Any

import cv2
import numpy as np

from stationcheck.demo_station.sample_video import FrameRenderer, Production

TILE_PX = (320, 240)
COLUMNS = 4


def scene_frames(p: Production) -> list[tuple[int, str]]:
    """(frame, caption) for each kind of scene, found from the expected decisions."""
    d = p.decisions

    def first(pred: Any) -> dict[str, Any] | None:
        return next((x for x in d if pred(x)), None)

    picks: list[tuple[int, str]] = []
    found = [
        (
            first(lambda x: x["kind"] == "step_done" and x.get("zone") == "bin_gasket"),
            0,
            "pick: gasket bin",
        ),
        (
            first(
                lambda x: (
                    x["kind"] == "enable"
                    and x["on"]
                    and x["serial"] == p.choreography.units[0].serial
                    and x["zone"] == "screw_4"
                )
            ),
            12,
            "fastening screw 4 (enabled)",
        ),
        (
            first(lambda x: x["kind"] == "alarm" and x["alarm"] == "wrong_position"),
            0,
            "wrong position: screw 2",
        ),
        (
            first(lambda x: x["kind"] == "position_result" and not x["ok"]),
            -8,
            "NOK tightening, retry next",
        ),
        (
            first(
                lambda x: (
                    x["kind"] == "position_result"
                    and x["serial"]
                    and x["ok"]
                    and any(
                        u.rework and u.start_frame <= x["frame"] < u.end_frame
                        for u in p.choreography.units
                    )
                )
            ),
            -8,
            "rework pass: screw 3 only",
        ),
        (
            first(lambda x: x["kind"] == "alarm" and x["alarm"] == "check_failed"),
            0,
            "locking pin not engaged",
        ),
        (
            first(lambda x: x["kind"] == "alarm" and x["alarm"] == "tool_lost"),
            6,
            "tool out of view",
        ),
        (
            first(lambda x: x["kind"] == "alarm" and x["alarm"] == "camera_moved"),
            45,
            "after the camera nudge",
        ),
    ]
    for decision, offset, caption in found:
        if decision is not None:
            frame = min(p.choreography.frame_count - 1, max(0, decision["frame"] + offset))
            serial = decision.get("serial") or ""
            picks.append((frame, f"{serial} {caption}".strip()))
    return picks


def contact_sheet(p: Production, renderer: FrameRenderer) -> np.ndarray:
    tiles = []
    for frame, caption in scene_frames(p):
        tile = cv2.resize(renderer.render(frame), TILE_PX, interpolation=cv2.INTER_AREA)
        cv2.rectangle(tile, (0, TILE_PX[1] - 22), (TILE_PX[0], TILE_PX[1]), (24, 24, 24), -1)
        label = f"#{frame} {caption}"
        cv2.putText(
            tile,
            label,
            (6, TILE_PX[1] - 7),
            cv2.FONT_HERSHEY_SIMPLEX,
            0.38,
            (235, 235, 235),
            1,
            cv2.LINE_AA,
        )
        tiles.append(tile)
    while len(tiles) % COLUMNS:
        tiles.append(np.zeros_like(tiles[0]))
    rows = [np.hstack(tiles[i : i + COLUMNS]) for i in range(0, len(tiles), COLUMNS)]
    sheet = np.vstack(rows)
    banner = np.full((26, sheet.shape[1], 3), 24, np.uint8)
    cv2.putText(
        banner,
        "stationcheck sample video - DEMO DATA (synthetic, invented station)",
        (8, 18),
        cv2.FONT_HERSHEY_SIMPLEX,
        0.5,
        (235, 235, 235),
        1,
        cv2.LINE_AA,
    )
    return np.vstack([banner, sheet])
