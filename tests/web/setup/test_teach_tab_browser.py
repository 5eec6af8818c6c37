"""The Teach tab in a real browser (Debian's chromium, headless): earlier teaching is said to
be loaded, a success is not shown as an error, the fields keep their values, a poor teaching
makes the badge warn and names its images, an untaught check zone warns."""

from __future__ import annotations

import shutil
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest

from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace, build_router

TAUGHT = Path("configs/demo_station/locking_pin")


@pytest.fixture
def teach_tab(page: Any, workspace: Path) -> Iterator[Callable[[], Any]]:
    servers: list[WebServer] = []
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))

    def start() -> Any:
        session = SetupSession.open(Workspace(workspace), workspace / "configs/demo_station.yaml")
        server = WebServer(build_router(session), "127.0.0.1", 0, AccessRule(None)).start()
        servers.append(server)
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']")
        page.click("#tabs button[data-tab='teach']")
        return page

    yield start
    for server in servers:
        server.close()
    assert errors == []


def test_teaching_keeps_fields_and_says_what_it_loaded(teach_tab: Callable[[], Any],
                                                       with_video: Path) -> None:
    page = teach_tab()
    page.wait_for_selector("#teach-loaded")
    loaded = page.inner_text("#teach-loaded")
    assert "Loaded 16 image(s) taught earlier" in loaded
    assert str(with_video / TAUGHT) in loaded
    page.fill("input[name='teach-count']", "2")
    page.dispatch_event("input[name='teach-count']", "change")
    page.fill("input[name='teach-every_s']", "0.5")
    page.dispatch_event("input[name='teach-every_s']", "change")
    page.fill("input[name='source-at_s']", "0.5")
    page.dispatch_event("input[name='source-at_s']", "change")
    page.click("button[data-teach='present']")
    page.wait_for_selector("#teach-action-note:has-text('taught present: now 10 present')")
    assert page.locator("#teach-action-note.finding.error").count() == 0
    assert page.input_value("input[name='teach-count']") == "2"
    assert page.input_value("input[name='teach-every_s']") == "0.5"
    assert page.input_value("input[name='source-at_s']") == "0.5"
    page.click("#tabs button[data-tab='picture']")
    assert page.locator("#picture-note").count() == 0  # one tab's message stays on its tab


def test_poor_teaching_warns_and_names_its_images(teach_tab: Callable[[], Any],
                                                  workspace: Path) -> None:
    manifest = workspace / TAUGHT / "references.yaml"
    text = manifest.read_text(encoding="utf-8")
    text = text.replace("- file: present-001.png\n  class: present",
                        "- file: present-001.png\n  class: absent")
    manifest.write_text(text.replace("- file: absent-001.png\n  class: absent",
                                     "- file: absent-001.png\n  class: present"))
    page = teach_tab()
    page.wait_for_selector("#panel .finding.warning:has-text('do not stand apart')")
    warning = page.inner_text("#panel .finding.warning")
    assert "absent-001.png, present-001.png" in warning
    assert page.inner_text("#check-summary").startswith("! usable with 2 warning(s)")
    assert page.locator(".thumbs figure.misfit").count() == 2


def test_an_untaught_check_zone_warns(teach_tab: Callable[[], Any], workspace: Path) -> None:
    shutil.rmtree(workspace / TAUGHT)
    page = teach_tab()
    page.wait_for_selector("#panel .finding.warning:has-text('is not taught')")
    assert "usable with" in page.inner_text("#check-summary")
