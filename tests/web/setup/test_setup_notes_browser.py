"""The safety and privacy notes on the setup screen in a real browser (Debian chromium through
Playwright): on screen without scrolling, for a station that is open and for a new one."""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import pytest
from playwright.sync_api import expect

from tests.web.setup.conftest import ServerFactory

SHOTS = Path("/tmp/shots/setup")


@pytest.mark.parametrize(("config", "size"), [("configs/demo_station.yaml", (1280, 800)),
                                              (None, (1920, 1080))])
def test_safety_and_privacy_notes_are_always_on_the_setup_screen(
        page: Any, setup_server: ServerFactory, workspace: Path, config: str | None,
        size: tuple[int, int]) -> None:
    if config is None:
        (workspace / "station").mkdir()
        shutil.copy(workspace / "configs/demo_station/reference.png",
                    workspace / "station/reference.png")
    client = setup_server(config)
    page.set_viewport_size({"width": size[0], "height": size[1]})
    page.goto(client.server.url)
    page.wait_for_selector("body[data-ready='1']")
    notes = page.locator("#caution")
    expect(notes).to_contain_text("not a safety function")
    expect(notes).to_contain_text("the camera films the people who work here")
    expect(notes).to_contain_text("data-protection rules")
    expect(notes).to_be_in_viewport()
    box = notes.bounding_box()
    assert box is not None and box["y"] + box["height"] <= size[1], box
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / f"{size[0]}x{size[1]}_{'demo' if config else 'new'}_notes.png"))
