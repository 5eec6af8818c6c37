"""Words on the setup screen in a real browser (Debian's chromium, headless): a fastener is
named by its zone and its place in the step is "order N of M"; a new pick step with no bin
chosen shows one finding; the dry-run summary tells frames run from frames drawn, and its
timeline lines carry no empty details."""

from __future__ import annotations

import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace, build_router


@pytest.fixture
def demo_page(page: Any, workspace: Path) -> Iterator[Any]:
    session = SetupSession.open(Workspace(workspace), workspace / "configs/demo_station.yaml")
    server = WebServer(build_router(session), "127.0.0.1", 0, AccessRule(None)).start()
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto(server.url)
    page.wait_for_selector("body[data-ready='1']")
    yield page
    server.close()
    assert errors == []


def test_fastener_names_and_order_words_differ(demo_page: Any) -> None:
    page = demo_page
    # the demo fastens its six screws in cross order: screw_4 comes second
    label = page.locator("svg g.zone[data-id='screw_4'] text")
    assert label.locator("tspan").all_text_contents() == ["screw_4", "order 2 of 6"]
    page.click("#tabs button[data-tab='steps']")
    chips = [" ".join(c.replace("\u00d7", "").split())
             for c in page.locator(".chip").all_inner_texts()]
    assert chips[:2] == ["order 1 screw_1", "order 2 screw_4"]


def test_a_new_pick_step_shows_one_finding(demo_page: Any) -> None:
    page = demo_page
    page.click("#tabs button[data-tab='steps']")
    page.click("button[data-add='pick']")
    step = page.locator(".row.step").last
    step.locator(".finding.error").first.wait_for()
    assert step.locator(".finding").all_inner_texts() == [
        "\u2716 steps[4].zone: is empty: choose or write a name"]


def test_dry_run_summary_and_timeline(with_video: Path, demo_page: Any) -> None:
    page = demo_page  # the video is in place before the page opens: it is the default
    page.click("#tabs button[data-tab='dryrun']")
    assert page.is_visible("#player-empty") and page.is_hidden("#player-frame")
    page.fill("input[name='dry-start_s']", "9")
    page.dispatch_event("input[name='dry-start_s']", "change")
    page.fill("input[name='dry-seconds']", "1")
    page.dispatch_event("input[name='dry-seconds']", "change")
    page.click("#dry-run")
    page.wait_for_selector("#dry-summary", timeout=60_000)
    summary = page.inner_text("#dry-summary")
    found = re.match(r"(\d+) frames run; tool enabled in (\d+) of them\. The player shows "
                     r"(\d+) \(every 2nd\)\.", summary)
    assert found, summary
    run, enabled, drawn = map(int, found.groups())
    assert run == 30 and drawn == 15 and 0 <= enabled <= run  # 1 s of a 30 f/s video
    lines = page.locator("#timeline div").all_inner_texts()
    assert lines and not [line for line in lines if re.search(r" \)|\(\)| ,", line)]
    assert page.is_visible("#player-frame")
