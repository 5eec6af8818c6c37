"""The station as one folder, in a real browser (Debian's chromium, headless): save-as into
another folder and reopen there with picture and teaching intact; a new station starts with
"take a picture first" and every error of the badge as text."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest

from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace, build_router


@pytest.fixture
def open_page(page: Any) -> Iterator[Callable[[Path, Path | None], Any]]:
    servers: list[WebServer] = []
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))

    def start(root: Path, config: Path | None) -> Any:
        session = SetupSession.open(Workspace(root), config)
        server = WebServer(build_router(session), "127.0.0.1", 0, AccessRule(None)).start()
        servers.append(server)
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']")
        return page

    yield start
    for server in servers:
        server.close()
    assert errors == []


def taught_thumbnails_loaded(page: Any) -> int:
    return int(page.evaluate("""() => [...document.querySelectorAll('.thumbs img')]
        .filter((img) => img.complete && img.naturalWidth > 0).length"""))


def test_save_as_in_another_folder_then_reopen_keeps_picture_and_teaching(
        open_page: Callable[[Path, Path | None], Any], workspace: Path) -> None:
    page = open_page(workspace, workspace / "configs" / "demo_station.yaml")
    page.wait_for_selector("#picture[data-loaded]")
    page.click("#tabs button[data-tab='teach']")
    page.wait_for_selector(f"#teach-loaded:has-text('{workspace}/configs/demo_station/')")
    page.fill("#save-path", "../line_2/station_b.yaml")
    page.click("#save-as-button")
    page.wait_for_selector("#save-note:has-text('saved line_2/station_b.yaml')")
    assert "copied taught references of 'locking_pin'" in page.get_attribute("#save-note",
                                                                             "title")
    assert page.inner_text("#file-name") == "line_2/station_b.yaml"
    assert (workspace / "line_2" / "demo_station" / "reference.png").is_file()
    # the page now works in the new folder
    page.wait_for_selector(f"#teach-loaded:has-text('{workspace}/line_2/demo_station/')")
    page.click("#tabs button[data-tab='zones']")

    page = open_page(workspace, workspace / "line_2" / "station_b.yaml")
    page.wait_for_selector("#picture[data-loaded]")
    assert page.is_hidden("#empty-state")
    page.click("#tabs button[data-tab='teach']")
    page.wait_for_selector("#teach-note:has-text('8 present, 8 absent')")
    page.wait_for_function("document.querySelectorAll('.thumbs img').length === 16")
    page.wait_for_function("""[...document.querySelectorAll('.thumbs img')]
        .every((img) => img.complete && img.naturalWidth > 0)""")
    assert taught_thumbnails_loaded(page) == 16
    badge = page.inner_text("#check-summary")
    assert "NOT usable" not in badge, badge


def test_new_station_asks_for_a_picture_and_shows_every_error(
        open_page: Callable[[Path, Path | None], Any], with_video: Path) -> None:
    page = open_page(with_video, None)
    page.wait_for_selector("#empty-state:not([hidden])")
    assert "take a picture first" in page.inner_text("#empty-state")
    page.wait_for_selector("#empty-tried:has-text('tried')")
    assert f"tried {with_video}/station/reference.png" in page.inner_text("#empty-tried")
    badge = page.inner_text("#check-summary")
    assert "NOT usable: 3 error(s)" in badge, badge
    shown = page.locator("#panel .finding.error, #other-findings .finding.error")
    assert shown.count() == 3  # reference frame (this tab), zones and steps (other tabs)
    assert "steps tab" in page.inner_text("#other-findings")

    page.select_option("select[name='pick-video']", "sample_video/demo_station.mp4")
    assert page.input_value("input[name='source-video']") == "sample_video/demo_station.mp4"
    page.fill("input[name='source-at_s']", "1")
    page.dispatch_event("input[name='source-at_s']", "change")
    page.click("#take-reference")
    page.wait_for_selector("#picture[data-loaded]")
    page.wait_for_selector("#empty-state[hidden]", state="attached")
    page.wait_for_function(
        "document.getElementById('check-summary').textContent.includes('2 error(s)')")
    assert (with_video / "station" / "reference.png").is_file()
    # built from a video: the config plays that video until a camera is named
    assert page.input_value("input[name='camera-source']") == "sample_video/demo_station.mp4"
    assert "camera source set to sample_video/demo_station.mp4" in page.inner_text(
        "#picture-note")
    assert page.locator("#picture-note.finding").count() == 0  # a success, not an error
